"""Calibration: measure a tube once, correct for it in every drawing.

  patterns  test patterns at known drive positions (grid, box, circle) and their targets
  sheet     measurement sheets (CSV: point, drive_x, drive_y, measured_x_mm, measured_y_mm)
  fit       least-squares fit of the deflection model p = D(A u + c), staged terms, report,
            residual picture
  anode     rescale the gains from physics when the anode voltage changes
  spots     fill a sheet from a photo of the screen

The forward model and its exact inverse live in the engine (vectorgen.deflection), which never
imports this package: rendering with a fitted profile needs only the profile. The commands are
in vectorgen/cli/calibrate.py.
"""
