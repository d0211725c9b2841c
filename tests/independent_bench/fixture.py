# The bench hardware of the independent bench as skrf networks: the directional coupler and test
# cable as one 2-port error box, the OPEN/SHORT/LOAD standards, and the wave the analyzer sees
# for anything at the test port (error box cascaded with it by skrf). Pure; no I/O.
import numpy as np
import skrf
from skrf.media import DefinedGammaZ0

from antenna import C0

Z0 = 50.0   # reference impedance of the bench, ohm


def frequency(f_hz):
    return skrf.Frequency.from_f(np.atleast_1d(np.asarray(f_hz, dtype=float)), unit='hz')


def air_media(freq):
    """Lossless TEM line in air, characteristic impedance Z0 (gamma = j*omega/c)."""
    return DefinedGammaZ0(freq, z0=Z0, gamma=1j * 2 * np.pi * freq.f / C0)


def one_port(freq, gamma):
    return skrf.Network(frequency=freq, s=np.asarray(gamma, dtype=complex).reshape(-1, 1, 1), z0=Z0)


def impedance_to_gamma(z):
    """Reflection coefficient of an impedance against Z0 (Pozar, "Microwave Engineering", ch. 2)."""
    return (z - Z0) / (z + Z0)


def line_two_port(freq, length_m, z_line, velocity_factor=1.0):
    """Lossless line of impedance z_line as a 2-port against Z0 from its ABCD matrix
    [[cos bl, jZ sin bl], [j sin bl / Z, cos bl]] (Pozar, "Microwave Engineering", table 4.1,
    from memory), converted to S-parameters by skrf."""
    bl = 2 * np.pi * freq.f / (C0 * velocity_factor) * length_m
    return _abcd_two_port(freq, np.cos(bl), 1j * z_line * np.sin(bl), 1j * np.sin(bl) / z_line, np.cos(bl))


def _abcd_two_port(freq, a, b, c, d):
    n = len(freq.f)
    abcd = np.empty((n, 2, 2), dtype=complex)
    abcd[:, 0, 0], abcd[:, 0, 1], abcd[:, 1, 0], abcd[:, 1, 1] = a, b, c, d
    return skrf.Network(frequency=freq, s=skrf.network.a2s(abcd, Z0), z0=Z0)


def series_impedance(freq, z):
    """A series impedance as a 2-port, ABCD [[1, Z], [0, 1]] (Pozar, table 4.1, from memory).
    (skrf 0.15.4's own lumped elements fail under numpy 1.24: they use the removed np.complex.)"""
    z = np.broadcast_to(np.asarray(z, dtype=complex), freq.f.shape)
    return _abcd_two_port(freq, 1, z, 0, 1)


def shunt_admittance(freq, y):
    """A shunt admittance as a 2-port, ABCD [[1, 0], [Y, 1]] (Pozar, table 4.1, from memory)."""
    y = np.broadcast_to(np.asarray(y, dtype=complex), freq.f.shape)
    return _abcd_two_port(freq, 1, 0, y, 1)


class Coupler:
    """Coupler, main line and test cable seen from the analyzer: a 2-port error box whose S11 is
    the directivity leakage, S21*S12 the reflection tracking, S22 the test-port source match
    (the one-port error model, e.g. Pozar ch. 4 / any VNA calibration text: common practice).
    Every figure is in `params` (bench.jsonc, "coupler")."""

    def __init__(self, params):
        self.p = params

    def error_box(self, freq):
        p = self.p
        f = freq.f
        w = 2 * np.pi * f
        ghz = f / 1e9
        # Coupling rolls with frequency (a slope in dB/GHz about 915 MHz); the cable loss grows
        # as sqrt(f) (skin effect: common practice, no source).
        coupling_db = p['coupling_db'] + p['coupling_slope_db_per_ghz'] * (ghz - 0.915)
        cable_db = p['cable_loss_db_at_1ghz'] * np.sqrt(ghz)
        tracking_db = coupling_db + p['mainline_loss_db'] + 2 * cable_db
        tau_cable = p['cable_delay_ns'] * 1e-9
        e01 = 10 ** (-tracking_db / 20) * np.exp(-1j * (2 * w * tau_cable + p['tracking_phase_rad']))
        # Directivity: the leakage sits `directivity_db` below the coupled wave of a full
        # reflection at the coupler; its level ripples with frequency and its phase turns with
        # the coupler's own delay.
        directivity_db = p['directivity_db'] + p['directivity_ripple_db'] * np.sin(2 * np.pi * f / (p['directivity_ripple_period_mhz'] * 1e6))
        e00 = 10 ** (-(coupling_db + p['mainline_loss_db'] + directivity_db) / 20) * \
            np.exp(-1j * (w * p['directivity_delay_ns'] * 1e-9 + p['directivity_phase_rad']))
        # Test-port source match: the coupler's output match seen through the cable, both ways.
        match_db = p['source_match_db'] + p['source_match_ripple_db'] * np.cos(2 * np.pi * f / (p['source_match_ripple_period_mhz'] * 1e6))
        e11 = 10 ** (-match_db / 20) * np.exp(-1j * (2 * w * tau_cable + p['source_match_phase_rad']))
        t = np.sqrt(e01)
        s = np.empty((len(f), 2, 2), dtype=complex)
        s[:, 0, 0] = e00
        s[:, 0, 1] = t
        s[:, 1, 0] = t
        s[:, 1, 1] = e11
        return skrf.Network(frequency=freq, s=s, z0=Z0)

    def reading_ratio(self, freq, load_network):
        """Complex ratio of the wave at the analyzer to the source wave, for `load_network` (a
        1-port on `freq`) at the test port: skrf's cascade of the error box with it."""
        return (self.error_box(freq) ** load_network).s[:, 0, 0]


class Standards:
    """OPEN, SHORT and LOAD as they really are (bench.jsonc, "standards"); none is ideal."""

    def __init__(self, params):
        self.p = params

    def _offset(self, freq, delay_ps, terminal_gamma, magnitude):
        # A lossless offset line of Z0 in front of the terminal reflection.
        line = air_media(freq).line(C0 * delay_ps * 1e-12, 'm')
        return line ** one_port(freq, magnitude * terminal_gamma)

    def open(self, freq):
        p = self.p['open']
        w = 2 * np.pi * freq.f
        zc = 1 / (1j * w * p['fringe_capacitance_ff'] * 1e-15)   # fringing capacitance to ground
        return self._offset(freq, p['offset_delay_ps'], impedance_to_gamma(zc), p['magnitude'])

    def short(self, freq):
        p = self.p['short']
        w = 2 * np.pi * freq.f
        zl = 1j * w * p['inductance_ph'] * 1e-12
        return self._offset(freq, p['offset_delay_ps'], impedance_to_gamma(zl), p['magnitude'])

    def load(self, freq):
        p = self.p['load']
        w = 2 * np.pi * freq.f
        z = p['resistance_ohm'] + 1j * w * p['inductance_nh'] * 1e-9
        return one_port(freq, impedance_to_gamma(z))

    def bare_port(self, freq):
        """Nothing connected: the open connector, modelled as the OPEN without its offset."""
        p = self.p['open']
        w = 2 * np.pi * freq.f
        zc = 1 / (1j * w * p['fringe_capacitance_ff'] * 1e-15)
        return one_port(freq, impedance_to_gamma(zc))

    def by_name(self, name, freq):
        return {'OPEN': self.open, 'SHORT': self.short, 'LOAD': self.load}[name](freq)
