# The antenna of the independent bench: the input impedance of a thin wire monopole over a ground
# plane by the induced-EMF method (sinusoidal current), from the thin dipole's self-impedance.
# Pure functions of frequency and geometry; no state.
import numpy as np
from scipy.special import sici

C0 = 299792458.0            # speed of light in vacuum, m/s (SI definition)
ETA0 = 376.730313668        # free-space wave impedance, ohm (CODATA 2018)
EULER_GAMMA = 0.5772156649015329


def dipole_impedance_at_current_maximum(kl, ka2_over_l):
    """Self-impedance R_m + jX_m of a thin centre-fed dipole of length l, referred to the current
    maximum (induced-EMF method). C. A. Balanis, "Antenna Theory", ch. 8 (self-impedance of a
    thin dipole, eqs. 8-60a and 8-60b), from memory:
      R_m = eta/2pi {C + ln(kl) - Ci(kl) + 1/2 sin(kl)[Si(2kl) - 2Si(kl)]
                     + 1/2 cos(kl)[C + ln(kl/2) + Ci(2kl) - 2Ci(kl)]}
      X_m = eta/4pi {2Si(kl) + cos(kl)[2Si(kl) - Si(2kl)]
                     - sin(kl)[2Ci(kl) - Ci(2kl) - Ci(2ka^2/l)]}
    (C: Euler's constant; `ka2_over_l` is k*a^2/l.) For l = lambda/2 they give 73.1 + j42.5 ohm."""
    si1, ci1 = sici(kl)
    si2, ci2 = sici(2 * kl)
    _, ci_a = sici(2 * ka2_over_l)
    r = ETA0 / (2 * np.pi) * (EULER_GAMMA + np.log(kl) - ci1 + 0.5 * np.sin(kl) * (si2 - 2 * si1)
                              + 0.5 * np.cos(kl) * (EULER_GAMMA + np.log(kl / 2) + ci2 - 2 * ci1))
    x = ETA0 / (4 * np.pi) * (2 * si1 + np.cos(kl) * (2 * si1 - si2) - np.sin(kl) * (2 * ci1 - ci2 - ci_a))
    return r + 1j * x


def monopole_input_impedance(f_hz, height_m, radius_m):
    """Input impedance of a thin monopole of height h over an infinite perfect ground plane:
    half that of the dipole of length l = 2h (image theory; Balanis ch. 4, "ground effects",
    from memory), with the dipole's current-maximum impedance carried to its centre feed by
    1/sin^2(kl/2) (Balanis ch. 8, from memory). Valid for kl/2 well below pi (first resonance)."""
    f = np.asarray(f_hz, dtype=float)
    k = 2 * np.pi * f / C0
    l = 2 * height_m
    z_m = dipole_impedance_at_current_maximum(k * l, k * radius_m ** 2 / l)
    return 0.5 * z_m / np.sin(k * l / 2) ** 2
