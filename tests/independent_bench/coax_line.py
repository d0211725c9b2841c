# The independent bench's offset line: a short coax adapter (a quarter wave at 915 MHz) with
# skin-effect and dielectric loss, an impedance a little off 50 ohm and a shunt capacitance at
# each connector, as an skrf 2-port from cascaded ABCD matrices; and its figures. Pure; no I/O.
import numpy as np
import skrf

import fixture

NEPER_DB = 20 / np.log(10)   # dB per neper (definition)


def _abcd(n):
    return np.zeros((n, 2, 2), dtype=complex)


class CoaxLine:
    """The line as it is (bench.jsonc, "offset_line"). Port 1 is the switch's side, port 2 the
    unit's socket. Every figure is a total over the line's length:

    - series L and shunt C from the high-frequency impedance Z and the TEM delay tau:
      L = Z*tau, C = tau/Z (lossless line, L' and C' from Z0 = sqrt(L'/C') and v = 1/sqrt(L'C'):
      Pozar, Microwave Engineering, sec. 2.1, from memory);
    - the conductors' series resistance R(f) from the stated conductor loss at 1 GHz, growing as
      sqrt(f) (skin depth ~ 1/sqrt(f): common practice, no source), through the low-loss
      attenuation alpha_c = R/(2Z) (Pozar sec. 2.7, from memory);
    - the conductors' internal inductance, whose reactance equals R(f) (a good conductor's surface
      impedance is (1 + j)*Rs: Ramo, Whinnery and Van Duzer, Fields and Waves, ch. 5, from
      memory); it makes the line a little slower at low frequency;
    - the dielectric's shunt conductance G = omega*C*tan(delta) (Pozar sec. 2.7, from memory);
    - gamma*l = sqrt((R + j omega L_total)(G + j omega C)) and Zc = sqrt((R + j omega L_total) /
      (G + j omega C)) (telegrapher's line: Pozar sec. 2.1, from memory), the line's ABCD
      [[cosh gl, Zc sinh gl], [sinh gl / Zc, cosh gl]] (Pozar table 4.1, from memory);
    - each connector a shunt capacitance, ABCD [[1, 0], [j omega C, 1]] (Pozar table 4.1, from
      memory), the discontinuity of a coax step modelled as a lumped shunt C (common practice,
      no source).
    The S-parameters against the bench's 50 ohm come from skrf's ABCD-to-S conversion."""

    def __init__(self, params):
        self.p = params

    def abcd(self, f_hz):
        p = self.p
        f = np.atleast_1d(np.asarray(f_hz, dtype=float))
        w = 2 * np.pi * f
        z, tau = p['characteristic_impedance_ohm'], p['delay_ps'] * 1e-12
        l_ext, c = z * tau, tau / z
        r = 2 * z * p['conductor_loss_db_at_1ghz'] / NEPER_DB * np.sqrt(f / 1e9)
        series = r + 1j * (w * l_ext + r)          # R + j(omega L_ext + omega L_int), omega L_int = R
        shunt = w * c * p['loss_tangent'] + 1j * w * c
        gl = np.sqrt(series * shunt)
        gl = np.where(gl.real < 0, -gl, gl)        # the decaying root
        zc = np.sqrt(series / shunt)
        zc = np.where(zc.real < 0, -zc, zc)
        line = _abcd(len(f))
        line[:, 0, 0] = line[:, 1, 1] = np.cosh(gl)
        line[:, 0, 1] = zc * np.sinh(gl)
        line[:, 1, 0] = np.sinh(gl) / zc
        near, far = _abcd(len(f)), _abcd(len(f))
        for m, cap in ((near, p['near_end_capacitance_pf']), (far, p['far_end_capacitance_pf'])):
            m[:, 0, 0] = m[:, 1, 1] = 1
            m[:, 1, 0] = 1j * w * cap * 1e-12
        return near @ line @ far

    def network(self, freq):
        """The line as an skrf 2-port on `freq` (an skrf Frequency), against the bench's Z0."""
        return skrf.Network(frequency=freq, s=skrf.network.a2s(self.abcd(freq.f), fixture.Z0), z0=fixture.Z0)

    def figures(self, f_hz):
        """The line's figures at f_hz as a kit would state them: the one-way insertion loss
        -20 log10 |S21| (dB), the one-way delay -arg(S21)/omega (s; S21's phase unwrapped from
        0 Hz, valid while the line is shorter than a wavelength, as here), and the return loss of
        the worse end, -20 log10 max(|S11|, |S22|) (dB)."""
        f = np.atleast_1d(np.asarray(f_hz, dtype=float))
        if f.max() * self.p['delay_ps'] * 1e-12 >= 0.9:
            raise ValueError('figures: S21 turns by a whole turn or more there; its phase needs unwrapping')
        s = self.network(fixture.frequency(f)).s
        s21 = s[:, 1, 0]
        # S21 turns by about -omega*tau: below 1/tau (3.6 GHz here) its phase, taken in
        # (-2 pi, 0], is the phase unwrapped from 0 Hz.
        phase = np.angle(s21)
        phase = np.where(phase > 0, phase - 2 * np.pi, phase)
        return {'loss_db': -20 * np.log10(np.abs(s21)),
                'delay_s': -phase / (2 * np.pi * f),
                'match_return_loss_db': -20 * np.log10(np.maximum(np.abs(s[:, 0, 0]), np.abs(s[:, 1, 1])))}
