"""Published fitting formulas for merger remnants, one module per quantity.

- :mod:`gwdeficit.fits.isco`: Kerr ISCO radius, energy and angular momentum (BPT 1972)
- :mod:`gwdeficit.fits.spin`: final spin of binary black holes
- :mod:`gwdeficit.fits.mass`: radiated energy / final mass of binary black holes
- :mod:`gwdeficit.fits.kick`: recoil speed of binary-black-hole remnants
- :mod:`gwdeficit.fits.registry`: the list of fits, their quantities and calibrated ranges

Every formula is a pure function on numpy arrays in fixed units that broadcasts like a ufunc;
no pandas here. Submodules are imported on demand (nothing is imported by this package).
"""
