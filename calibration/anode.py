"""Rescale a profile's gains when the anode voltage changes, from the physics of deflection.

Deflection sensitivity S (mm on the face per unit drive) against the anode voltage V:

  magnetic       S ~ 1 / p ~ 1 / sqrt(V (1 + V / V0)),  V0 = 2 m_e c^2 / e  (= 1021.998 kV)
                 A coil's field B bends the beam with radius r = p / (e B), so for a small angle
                 the spot moves by ~ L l e B / p; the electron's momentum after V volts is
                 p = sqrt(2 m_e e V (1 + e V / (2 m_e c^2))) (relativistic).
  electrostatic  S ~ 1 / V
                 Plates at voltage difference V_d, spacing d, length l and distance L to the
                 face deflect by L l V_d / (2 d V); the small relativistic correction is not
                 applied (the usual textbook law).

Both laws from memory (standard electron-optics results, found in general physics and
electronics texts). The constants m_e, c and e come from scipy.constants (CODATA).

What changes: the gains, i.e. the matrix A, scale by S(V_new) / S(V_old). The centring offset c
scales by the same factor: it is made by a field (centring magnets or a DC current in the yoke,
or a DC offset on the plates) that deflects faster electrons less, just like the signal. (An
offset from the gun sitting off the tube axis would not scale; the quick box trim,
`vectorgen fit --gains-only`, re-fits the offset anyway.) So the zero-drive spot moves by the
factor, and the drive for the same deflection from it scales by exactly 1 / factor; on a
centred tube (offset 0) that is the drive for the same spot anywhere on the face. The pincushion terms are kept: they are
dimensionless and belong to the geometry of the yoke field and the face.
"""

from __future__ import annotations

import math

from vectorgen.errors import VectorgenError

MIN_KV = 0.001         # 1 V: below this it is no anode voltage (or it was given in MV)
MAX_KV = 100.0      # above this it is not a CRT anode voltage (or it was given in volts)


def rest_voltage_kv() -> float:
    """2 m_e c^2 / e in kV (1021.998 kV with CODATA 2018)."""
    from scipy.constants import c, e, m_e

    return 2.0 * m_e * c * c / e / 1e3


def sensitivity(kind: str, kv: float) -> float:
    """Relative deflection sensitivity at anode voltage `kv` (arbitrary units; only ratios
    matter)."""
    if kind == "magnetic":
        return 1.0 / math.sqrt(kv * (1.0 + kv / rest_voltage_kv()))
    if kind == "electrostatic":
        return 1.0 / kv
    raise VectorgenError(f"unknown deflection kind {kind!r}: magnetic or electrostatic")


def gain_factor(kind: str, kv_old: float, kv_new: float) -> float:
    """How much the gains (mm per full-scale drive) change going from kv_old to kv_new."""
    for what, v in (("old", kv_old), ("new", kv_new)):
        check_kv(v, f"the {what} anode voltage")
    return sensitivity(kind, kv_new) / sensitivity(kind, kv_old)


def check_kv(kv: float, what: str = "--kv") -> float:
    if not (isinstance(kv, (int, float)) and math.isfinite(kv) and MIN_KV <= kv <= MAX_KV):
        raise VectorgenError(f"{what} must be an anode voltage in kV between {MIN_KV:g} and "
                             f"{MAX_KV:g} (got {kv!r}; give kilovolts, e.g. 8.5)")
    return float(kv)


def rescale_profile(profile, kv_new: float, kv_old: float | None = None):
    """A copy of `profile` with gains and offset rescaled for anode voltage `kv_new` (kV).
    `kv_old` is the voltage the profile was measured at, when it does not record it. Returns
    (new profile, gain factor, old kV)."""
    d = profile.deflection
    kv_new = check_kv(kv_new, "--kv")
    if kv_old is None:
        if not d.anode_kv:
            raise VectorgenError(
                f"{profile.source} does not record the anode voltage it was measured at: give "
                f"--from-kv OLD, or set anode_kv in its [deflection] table")
        kv_old = d.anode_kv
    else:
        kv_old = check_kv(kv_old, "--from-kv")
        if d.anode_kv and not math.isclose(d.anode_kv, kv_old, rel_tol=1e-9):
            raise VectorgenError(f"{profile.source} records anode_kv = {d.anode_kv:g} but "
                                 f"--from-kv says {kv_old:g}: drop --from-kv or correct the file")
    f = gain_factor(d.kind, kv_old, kv_new)
    out = profile.copy()
    out.deflection.matrix_mm = [[f * v for v in row] for row in d.matrix_mm]
    out.deflection.offset_mm = [f * v for v in d.offset_mm]
    out.deflection.anode_kv = kv_new
    return out, f, kv_old
