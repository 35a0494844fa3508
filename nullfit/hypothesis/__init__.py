"""The hypothesis side: what a hypothesised anisotropy would have produced in this apparatus, at
this site and time.

:mod:`.offline` (astropy with bundled data only), :mod:`.site` (where the table stands),
:mod:`.earth` (Earth orientation, sidereal time), :mod:`.velocities` (velocity hypotheses on the
sky), :mod:`.horizontal` (a velocity projected on the table plane), :mod:`.apparatus` (arm
length, wavelength, readout), :mod:`.expected` (the expected 2θ signal of a scan),
:mod:`.sidereal` (the SME/RMS sidereal model: quadratures of B(t), C(t), design, templates).
"""
