"""Calibration: measure a tube once, correct for it in every drawing.

  patterns  test patterns at known drive positions (grid, box, circle), and the check pattern
            at known mm positions through a calibrated profile, with their targets
  sheet     measurement sheets (CSV: point, drive_x, drive_y or target_x_mm, target_y_mm,
            measured_x_mm, measured_y_mm)
  fit       least-squares fit of the deflection model p = D(A u + c), staged terms, report
            (each figure defined, with the targets it rests on), residual picture
  area      the largest usable area a fitted tube reaches within full scale
  wiring    mirrored, swapped or inverted axes read from the fitted matrix, and their fix
  check     the remaining error of a calibrated tube, from the check pattern's sheet
  anode     rescale the gains from physics when the anode voltage changes
  spots     fill a sheet from a photo of the screen

The forward model and its exact inverse live in the engine (vectorgen.deflection), which never
imports this package: rendering with a fitted profile needs only the profile. The commands are
in vectorgen/cli/calibrate.py.
"""
