"""Reference products for the batched-engine tests: python-flint, one row pair at a time."""

import flint


def flint_row_product(a, b, m=None):
    """python-flint's product of one row pair, as Python ints, zero-padded to full length
    (``fmpz_poly`` over the integers; ``nmod_poly`` for a word-size modulus ``m``; for a larger
    one the exact product reduced, as ``nmod_poly`` takes word-size moduli only)."""
    if m is not None and m < 2**63:
        c = (flint.nmod_poly([int(v) % m for v in a], m)
             * flint.nmod_poly([int(v) % m for v in b], m))
        ref = [int(v) for v in c.coeffs()]
    else:
        c = flint.fmpz_poly([int(v) for v in a]) * flint.fmpz_poly([int(v) for v in b])
        ref = [int(v) if m is None else int(v) % m for v in c.coeffs()]
    return ref + [0] * (len(a) + len(b) - 1 - len(ref))
