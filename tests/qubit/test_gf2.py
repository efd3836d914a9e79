"""GF(2) linear algebra against its definitions (closed forms, common practice)."""

from __future__ import annotations

import numpy as np
import pytest

from eigensweep.qubit import gf2


@pytest.mark.parametrize("seed", range(5))
def test_inverse_times_matrix_is_identity_mod_2(seed):
    rng = np.random.default_rng(seed)
    n = 3 + seed
    while True:  # a random invertible binary matrix: full GF(2) rank
        a = rng.integers(0, 2, size=(n, n))
        if gf2.rank(a) == n:
            break
    inv = gf2.inverse(a)
    # definition of the inverse over GF(2): A A^-1 = A^-1 A = I (mod 2)
    assert np.array_equal((a @ inv) % 2, np.eye(n, dtype=int))
    assert np.array_equal((inv @ a) % 2, np.eye(n, dtype=int))


def test_parity_matrix_inverse_is_the_bidiagonal_difference():
    # closed form (Seeley, Richard, Love 2012): the parity encoding b_k = n_0 + ... + n_k is
    # inverted by n_k = b_k + b_{k-1}
    n = 6
    want = np.eye(n, dtype=np.uint8) + np.eye(n, k=-1, dtype=np.uint8)
    assert np.array_equal(gf2.inverse(np.tril(np.ones((n, n), dtype=np.uint8))), want)


def test_singular_matrix_is_refused():
    with pytest.raises(ValueError, match="singular"):
        gf2.inverse(np.array([[1, 1], [1, 1]]))


@pytest.mark.parametrize("seed", range(5))
def test_null_space_is_annihilated_and_has_full_dimension(seed):
    rng = np.random.default_rng(10 + seed)
    mat = rng.integers(0, 2, size=(4, 9))
    basis = gf2.null_space(mat)
    # definition: M v = 0 (mod 2) for every basis vector; rank-nullity: dim = cols - rank
    assert not np.any((mat @ basis.T.astype(int)) % 2)
    assert basis.shape[0] == 9 - gf2.rank(mat)
    assert gf2.rank(basis) == basis.shape[0]  # independent vectors
