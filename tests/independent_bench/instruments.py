# The instruments of the independent bench and what they share: the test-port world (what is in
# the socket, which switch arm is closed, the source's state), a CW signal generator, a swept
# spectrum analyzer and the arm switch, in this bench's own SCPI dialect (README.md, "Dialect").
import math

import numpy as np

import fixture
from coax_line import CoaxLine
from scpi import (DB_UNITS, FREQUENCY_UNITS, POWER_UNITS, ErrorQueue, Pattern, ScpiError, boolean, nr3,
                  number)

BOLTZMANN_DBM_PER_HZ = -174.0   # thermal noise at 290 K, dBm/Hz (kTB: common practice)
GRID_HZ = np.arange(700e6, 1200e6 + 1, 100e3)   # frequencies computed at once on each connection
ARMS = ('OPEN', 'SHORT', 'LOAD', 'SOCKET', 'LINE')


class World:
    """The test port and the signal generator's output, shared by the instruments. The test port
    is the switch's common port. Its SOCKET arm reaches the unit socket directly, its LINE arm
    the same socket through the offset line, its OPEN, SHORT and LOAD arms the bench's own
    standards; the arms themselves are ideal (identical, lossless, no leakage between arms).
    The control port places a unit or a standard in the socket; the switch rests on SOCKET
    after power-on and *RST, so a station that never drives the switch sees the socket as if it
    were on the test port."""

    def __init__(self, config, lot):
        self.coupler = fixture.Coupler(config['coupler'])
        self.standards = fixture.Standards(config['standards'])
        self.line = CoaxLine(config['offset_line'])
        self.lot = lot
        self.rng = np.random.default_rng(int(config['seed']))
        self.connected = None          # in the socket: None, ("standard", "OPEN") or ("unit", serial)
        self.arm = 'SOCKET'            # the closed switch arm, one of ARMS
        self.arm_changes = 0
        self.source_frequency_hz = 1e9
        self.source_power_dbm = -30.0
        self.source_on = False
        self.sweeps = 0
        self._grid = {}
        self._update()

    def _socket_network(self, freq):
        if self.connected is None:
            return self.standards.bare_port(freq)
        kind, name = self.connected
        if kind == 'standard':
            return self.standards.by_name(name, freq)
        return self.lot.network(self.lot.unit(name), freq)

    def _network(self, freq):
        """What the test port sees: the closed arm's standard, the socket, or the line into it."""
        if self.arm in ('OPEN', 'SHORT', 'LOAD'):
            return self.standards.by_name(self.arm, freq)
        if self.arm == 'LINE':
            return self.line.network(freq) ** self._socket_network(freq)
        return self._socket_network(freq)

    def _update(self):
        freq = fixture.frequency(GRID_HZ)
        ratio = self.coupler.reading_ratio(freq, self._network(freq))
        self._grid = {int(round(f)): r for f, r in zip(GRID_HZ, ratio)}

    def _connect(self, what):
        self.connected = what
        self._update()

    def connect_standard(self, name):
        if name not in ('OPEN', 'SHORT', 'LOAD'):
            raise ValueError(f'unknown standard "{name}"; this bench has OPEN, SHORT and LOAD')
        self._connect(('standard', name))

    def connect_unit(self, serial):
        self.lot.unit(serial)          # KeyError names the serial
        self._connect(('unit', serial))

    def disconnect(self):
        self._connect(None)

    def select_arm(self, arm):
        if arm not in ARMS:
            raise ValueError(f'unknown arm "{arm}"')
        if arm != self.arm:
            self.arm = arm
            self.arm_changes += 1
            self._update()

    def ratio(self, f_hz):
        """Analyzer wave / source wave at f_hz for what the test port sees (skrf's cascade)."""
        key = int(round(f_hz))
        if key in self._grid and abs(key - f_hz) < 1e-3:
            return self._grid[key]
        freq = fixture.frequency([f_hz])
        return self.coupler.reading_ratio(freq, self._network(freq))[0]


class Instrument:
    """Common part: IEEE 488.2 common commands, the error queue, the command table."""

    identity = ''

    def __init__(self, world):
        self.world = world
        self.errors = ErrorQueue()
        self.table = []       # [(Pattern, handler(params) -> reply or None)]
        self.messages = 0
        self.reset()

    def add(self, pattern, handler):
        self.table.append((Pattern(pattern), handler))

    def reset(self):
        pass

    def common(self, header, query):
        if header == '*IDN' and query:
            return self.identity
        if header == '*OPC' and query:
            return '1'            # every operation here completes before the next message
        if header == '*ESR' and query:
            return '0'
        if header == '*RST' and not query:
            self.reset()
            return None
        if header == '*CLS' and not query:
            self.errors.clear()
            return None
        if header in ('*WAI', '*OPC') and not query:
            return None
        raise ScpiError(-113, f'Undefined header;{header}{"?" if query else ""}')

    def handle(self, line):
        """One program message -> the reply line, or None when it holds no query."""
        self.messages += 1
        replies = []
        for tokens, query, params in _units(line):
            try:
                if tokens and tokens[0].startswith('*'):
                    r = self.common(tokens[0], query)
                elif Pattern('SYSTem:ERRor[:NEXT]?').matches(tokens, query):
                    r = self.errors.pop()
                else:
                    for pattern, handler in self.table:
                        if pattern.matches(tokens, query):
                            r = handler(params)
                            break
                    else:
                        raise ScpiError(-113, f'Undefined header;{":".join(tokens)}{"?" if query else ""}')
                if r is not None:
                    replies.append(r)
            except ScpiError as e:
                self.errors.push(e.code, e.message)
        return ';'.join(replies) if replies else None


def _units(line):
    from scpi import split_message
    return split_message(line)


class SignalGenerator(Instrument):
    """CW generator, 100 kHz to 3 GHz, -90 to +13 dBm. A bare frequency is in MHz (this dialect's
    default unit); the level is in dBm."""

    identity = 'Independent Bench,IB-SG3,IB-SG-0001,1.0'
    F_MIN, F_MAX, P_MIN, P_MAX = 100e3, 3e9, -90.0, 13.0

    def __init__(self, world):
        super().__init__(world)
        for p in ('[SOURce]:FREQuency:FIXed', '[SOURce]:FREQuency:CW', '[SOURce]:FREQuency'):
            self.add(p, self.set_frequency)
            self.add(p + '?', lambda _: nr3(self.world.source_frequency_hz, 9))
        self.add('[SOURce]:POWer[:LEVel][:IMMediate][:AMPLitude]', self.set_power)
        self.add('[SOURce]:POWer[:LEVel][:IMMediate][:AMPLitude]?', lambda _: nr3(self.world.source_power_dbm, 3))
        self.add('OUTPut[:STATe]', self.set_output)
        self.add('OUTPut[:STATe]?', lambda _: '1' if self.world.source_on else '0')

    def reset(self):
        self.world.source_frequency_hz = 1e9
        self.world.source_power_dbm = -30.0
        self.world.source_on = False

    def set_frequency(self, params):
        f = number(params, FREQUENCY_UNITS, 'MHZ', 'FREQuency')
        if not self.F_MIN <= f <= self.F_MAX:
            raise ScpiError(-222, f'Data out of range;frequency {f:.6g} Hz outside 100 kHz to 3 GHz')
        self.world.source_frequency_hz = f

    def set_power(self, params):
        p = number(params, POWER_UNITS, 'DBM', 'POWer')
        if not self.P_MIN <= p <= self.P_MAX:
            raise ScpiError(-222, f'Data out of range;level {p:g} dBm outside -90 to +13 dBm')
        self.world.source_power_dbm = p

    def set_output(self, params):
        self.world.source_on = boolean(params, 'OUTPut')


class SpectrumAnalyzer(Instrument):
    """Swept analyzer, 9 kHz to 3 GHz. One sweep (INITiate) fills a trace of `trace_points` bins
    over the span; the marker peak takes the largest bin. Readings carry `reading_noise_db` of
    Gaussian noise (per bin, per sweep) on top of the displayed noise floor
    -174 dBm/Hz + noise figure + 10 log10(RBW) + input attenuation (kTB: common practice)."""

    identity = 'Independent Bench,IB-SA3,IB-SA-0001,1.0'

    def __init__(self, world, params):
        self.p = params
        super().__init__(world)
        for p in ('[SENSe]:FREQuency:CENTer', '[SENSe]:FREQuency:SPAN'):
            key = 'center_hz' if 'CENT' in p else 'span_hz'
            self.add(p, lambda v, key=key: self.set_frequency_setting(key, v))
            self.add(p + '?', lambda _, key=key: nr3(self.s[key], 9))
        for bw in ('BWIDth', 'BANDwidth'):
            self.add(f'[SENSe]:{bw}[:RESolution]', lambda v: self.set_bandwidth('rbw_hz', v))
            self.add(f'[SENSe]:{bw}[:RESolution]?', lambda _: nr3(self.s['rbw_hz'], 6))
            self.add(f'[SENSe]:{bw}:VIDeo', lambda v: self.set_bandwidth('vbw_hz', v))
        self.add('DISPlay[:WINDow#]:TRACe#:Y[:SCALe]:RLEVel', self.set_reference)
        self.add('INPut:ATTenuation', self.set_attenuation)
        self.add('INITiate:CONTinuous', lambda v: self.s.__setitem__('continuous', boolean(v, 'INITiate:CONTinuous')))
        self.add('INITiate[:IMMediate]', lambda _: self.sweep())
        self.add('[SENSe]:DETector[:FUNCtion]', self.set_detector)
        self.add('CALCulate#:MARKer#[:STATe]', lambda v: self.s.__setitem__('marker_on', boolean(v, 'MARKer:STATe')))
        self.add('CALCulate#:MARKer#:PEAK', lambda _: self.peak())
        self.add('CALCulate#:MARKer#:LEVel?', self.marker_level)
        self.add('CALCulate#:MARKer#:FREQuency?', lambda _: nr3(self.s['marker_hz'], 9))
        self.add('TRACe#[:DATA]?', self.trace_data)

    def reset(self):
        self.s = {'center_hz': 1.5e9, 'span_hz': 3e9, 'rbw_hz': 1e6, 'vbw_hz': 1e6, 'reference_dbm': 0.0,
                  'attenuation_db': 10.0, 'continuous': True, 'detector': 'POS', 'marker_on': False,
                  'marker_hz': 1.5e9, 'marker_dbm': None}
        self.trace = None

    def set_frequency_setting(self, key, params):
        f = number(params, FREQUENCY_UNITS, 'HZ', key)
        lo = 0.0 if key == 'span_hz' else 9e3
        if not lo <= f <= 3e9:
            raise ScpiError(-222, f'Data out of range;{key} {f:.6g} Hz')
        self.s[key] = f

    def set_bandwidth(self, key, params):
        f = number(params, FREQUENCY_UNITS, 'HZ', key)
        if not 10 <= f <= 10e6:
            raise ScpiError(-222, f'Data out of range;{key} {f:.6g} Hz outside 10 Hz to 10 MHz')
        self.s[key] = f

    def set_reference(self, params):
        r = number(params, POWER_UNITS, 'DBM', 'RLEVel')
        if not -120 <= r <= 30:
            raise ScpiError(-222, f'Data out of range;reference level {r:g} dBm')
        self.s['reference_dbm'] = r

    def set_attenuation(self, params):
        a = number(params, DB_UNITS, 'DB', 'ATTenuation')
        if not 0 <= a <= 50 or abs(a / 5 - round(a / 5)) > 1e-9:
            raise ScpiError(-222, f'Data out of range;attenuation {a:g} dB (0 to 50 dB in 5 dB steps)')
        self.s['attenuation_db'] = a

    def set_detector(self, params):
        d = params.strip().upper()
        if d not in ('POS', 'POSITIVE', 'SAMP', 'SAMPLE', 'RMS', 'AVER', 'AVERAGE'):
            raise ScpiError(-224, f'Illegal parameter value;detector "{params}"')
        self.s['detector'] = d[:3]

    def noise_floor_dbm(self):
        return BOLTZMANN_DBM_PER_HZ + self.p['noise_figure_db'] + 10 * math.log10(self.s['rbw_hz']) + \
            self.s['attenuation_db']

    def sweep(self):
        w = self.world
        w.sweeps += 1
        n = int(self.p['trace_points'])
        center, span, rbw = self.s['center_hz'], self.s['span_hz'], self.s['rbw_hz']
        bins = center + (np.linspace(-0.5, 0.5, n) * span if span > 0 else np.zeros(n))
        floor_mw = 10 ** (self.noise_floor_dbm() / 10)
        # Noise in each bin: the envelope of Gaussian noise has exponentially distributed power
        # (common practice, no source); the positive detector of a bin sees the largest of a few.
        noise_mw = floor_mw * w.rng.exponential(1.0, size=(n, 4)).max(axis=1)
        tone_mw = np.zeros(n)
        if w.source_on:
            level = w.source_power_dbm + 20 * math.log10(max(abs(w.ratio(w.source_frequency_hz)), 1e-15))
            # Gaussian resolution filter: -3.01 dB at RBW/2 off the tone (common practice).
            offset = bins - w.source_frequency_hz
            shape_db = -3.0103 * (2 * offset / rbw) ** 2
            tone_mw = 10 ** ((level + np.maximum(shape_db, -200)) / 10)
        total_db = 10 * np.log10(tone_mw + noise_mw) + w.rng.normal(0, self.p['reading_noise_db'], n)
        self.trace = (bins, total_db)

    def peak(self):
        if self.trace is None:
            raise ScpiError(-221, 'Settings conflict;no sweep taken since reset')
        bins, db = self.trace
        i = int(np.argmax(db))
        self.s['marker_hz'], self.s['marker_dbm'] = float(bins[i]), float(db[i])

    def marker_level(self, _):
        if self.s['marker_dbm'] is None:
            raise ScpiError(-221, 'Settings conflict;marker not placed')
        return nr3(self.s['marker_dbm'], 6)

    def trace_data(self, _):
        if self.trace is None:
            raise ScpiError(-221, 'Settings conflict;no sweep taken since reset')
        return ','.join(nr3(x, 5) for x in self.trace[1])


class ArmSwitch(Instrument):
    """A five-arm coaxial switch: one arm closed at a time, chosen by name (character program
    data, long or short form, any case: SCPI-1999 vol. 1, ch. 7, from memory). *RST closes
    SOCKet. The relay settles before the command returns, so *OPC? answers 1 at once."""

    identity = 'Independent Bench,IB-SW5,IB-SW-0001,1.0'
    # (long form, short form, the world's arm); the short form is the upper-case part.
    NAMES = (('OPEN', 'OPEN', 'OPEN'), ('SHORt', 'SHOR', 'SHORT'), ('LOAD', 'LOAD', 'LOAD'),
             ('SOCKet', 'SOCK', 'SOCKET'), ('LINE', 'LINE', 'LINE'))

    def __init__(self, world):
        super().__init__(world)
        self.add('ROUTe:ARM[:SELect]', self.select)
        self.add('ROUTe:ARM[:SELect]?', lambda _: self._short(self.world.arm))
        self.add('ROUTe:ARM:CATalog?', lambda _: ','.join(short for _, short, _ in self.NAMES))
        self.add('ROUTe:ARM:COUNt?', lambda _: str(self.world.arm_changes))

    def reset(self):
        self.world.select_arm('SOCKET')

    def _short(self, arm):
        return next(short for _, short, a in self.NAMES if a == arm)

    def select(self, params):
        word = params.strip().upper()
        for long, short, arm in self.NAMES:
            if word in (long.upper(), short):
                self.world.select_arm(arm)
                return None
        raise ScpiError(-224, f'Illegal parameter value;arm {params.strip()} is not OPEN, SHORt, LOAD, SOCKet or LINE')
