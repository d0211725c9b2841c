# A lot of whip antennas for the independent bench: reproducible units from a lot file (seeded),
# each unit's DUT network (element behind its feed pin, with its defect), and its ground truth
# (true return loss, frequency of the largest true return loss, defect class). Pure; no I/O.
import numpy as np
from scipy.optimize import minimize_scalar

import fixture
from antenna import monopole_input_impedance

DEFECTS = ('lossy', 'too-long', 'too-short', 'open-feed', 'shorted-feed')
LOT_KEYS = {
    'name', 'description', 'count', 'seed', 'serial_pattern', 'nominal_length_mm', 'length_spread_mm',
    'wire_diameter_mm', 'wire_diameter_spread_mm', 'feed_pin_mm', 'feed_pin_impedance_ohm',
    'conductor_loss_ohm', 'defects', 'too_long_mm', 'too_short_mm', 'lossy_extra_ohm', 'open_gap_pf',
    'shorted_bridge_nh'}


class LotError(ValueError):
    pass


def _range(lot, key, where):
    v = lot.get(key)
    if not (isinstance(v, list) and len(v) == 2 and all(isinstance(x, (int, float)) for x in v) and v[0] <= v[1]):
        raise LotError(f'{where}: "{key}" must be [low, high] with low <= high, found {v!r}')
    return float(v[0]), float(v[1])


def _number(lot, key, where, low, high):
    v = lot.get(key)
    if not isinstance(v, (int, float)) or isinstance(v, bool) or not (low <= v <= high):
        raise LotError(f'{where}: "{key}" must be a number from {low} to {high}, found {v!r}')
    return float(v)


class Unit:
    def __init__(self, serial, defect, length_mm, diameter_mm, pin_mm, loss_ohm, extra):
        self.serial = serial
        self.defect = defect            # "" for a good unit
        self.length_mm = length_mm
        self.diameter_mm = diameter_mm
        self.pin_mm = pin_mm
        self.loss_ohm = loss_ohm
        self.extra = extra              # lossy: ohm; open-feed: pF; shorted-feed: nH


class Lot:
    def __init__(self, doc, where):
        unknown = sorted(set(doc) - LOT_KEYS)
        if unknown:
            raise LotError(f'{where}: unknown key "{unknown[0]}"; allowed: {", ".join(sorted(LOT_KEYS))}')
        self.name = str(doc.get('name', 'lot'))
        count = int(_number(doc, 'count', where, 1, 100000))
        seed = int(_number(doc, 'seed', where, 0, 2 ** 63))
        pattern = doc.get('serial_pattern', 'IB915-{:04d}')
        self.nominal_length_mm = _number(doc, 'nominal_length_mm', where, 1, 10000)
        length_sd = _number(doc, 'length_spread_mm', where, 0, 100)
        dia = _number(doc, 'wire_diameter_mm', where, 0.01, 100)
        dia_sd = _number(doc, 'wire_diameter_spread_mm', where, 0, 10)
        self.pin_z = _number(doc, 'feed_pin_impedance_ohm', where, 10, 500)
        pin = _range(doc, 'feed_pin_mm', where)
        loss = _range(doc, 'conductor_loss_ohm', where)
        ranges = {'too-long': _range(doc, 'too_long_mm', where), 'too-short': _range(doc, 'too_short_mm', where),
                  'lossy': _range(doc, 'lossy_extra_ohm', where), 'open-feed': _range(doc, 'open_gap_pf', where),
                  'shorted-feed': _range(doc, 'shorted_bridge_nh', where)}
        shares = doc.get('defects', {})
        if not isinstance(shares, dict):
            raise LotError(f'{where}: "defects" must be an object of defect -> share')
        labels = []
        for d, share in shares.items():
            if d not in DEFECTS:
                raise LotError(f'{where}: /defects/{d}: unknown defect; allowed: {", ".join(DEFECTS)}')
            if not isinstance(share, (int, float)) or not 0 <= share <= 1:
                raise LotError(f'{where}: /defects/{d}: share must be 0 to 1, found {share!r}')
            labels += [d] * int(round(share * count))
        if len(labels) > count:
            raise LotError(f'{where}: "defects" add up to more units than "count"')
        rng = np.random.default_rng(seed)
        labels += [''] * (count - len(labels))
        labels = list(rng.permutation(labels))
        self.units = []
        for i, d in enumerate(labels):
            length = self.nominal_length_mm + length_sd * rng.standard_normal()
            extra = 0.0
            if d == 'too-long':
                length = self.nominal_length_mm + rng.uniform(*ranges[d])
            elif d == 'too-short':
                length = self.nominal_length_mm - rng.uniform(*ranges[d])
            elif d:
                extra = rng.uniform(*ranges[d])
            self.units.append(Unit(pattern.format(i + 1), d, float(length),
                                   float(max(0.05, dia + dia_sd * rng.standard_normal())),
                                   float(rng.uniform(*pin)), float(rng.uniform(*loss)), float(extra)))
        self.by_serial = {u.serial: u for u in self.units}

    def unit(self, serial):
        if serial not in self.by_serial:
            raise KeyError(f'no unit "{serial}" in lot {self.name}')
        return self.by_serial[serial]

    # --- the unit as a network ---

    def element_impedance(self, unit, f_hz):
        z = monopole_input_impedance(f_hz, unit.length_mm * 1e-3, unit.diameter_mm * 0.5e-3)
        z = z + unit.loss_ohm
        if unit.defect == 'lossy':
            z = z + unit.extra        # a corroded joint in series at the element's base
        return z

    def network(self, unit, freq, antenna_only=False):
        """The unit at the test port: feed pin (a short line of its own impedance) in front of the
        element, with a broken feed as a series gap capacitance and a shorted feed as a shunt
        bridge inductance at the element's base (series and shunt elements from skrf's media)."""
        element = fixture.one_port(freq, fixture.impedance_to_gamma(self.element_impedance(unit, freq.f)))
        if not antenna_only:
            w = 2 * np.pi * freq.f
            if unit.defect == 'open-feed':
                element = fixture.series_impedance(freq, 1 / (1j * w * unit.extra * 1e-12)) ** element
            elif unit.defect == 'shorted-feed':
                element = fixture.shunt_admittance(freq, 1 / (1j * w * unit.extra * 1e-9)) ** element
        return fixture.line_two_port(freq, unit.pin_mm * 1e-3, self.pin_z) ** element

    def true_rl_db(self, unit, f_hz, antenna_only=False):
        g = np.abs(self.network(unit, fixture.frequency(f_hz), antenna_only).s[:, 0, 0])
        with np.errstate(divide='ignore'):
            return -20 * np.log10(g)

    def truth(self, unit, f_hz):
        rl = self.true_rl_db(unit, f_hz)
        # f0: the largest true return loss on a 1 MHz grid over 500-1500 MHz, refined to 100 Hz.
        # For a broken or shorted feed it is the element's behind the defect.
        no_response = unit.defect in ('open-feed', 'shorted-feed')
        grid = np.arange(500e6, 1500e6 + 1, 1e6)
        curve = self.true_rl_db(unit, grid, antenna_only=no_response)
        i = int(np.argmax(curve))
        lo, hi = grid[max(i - 1, 0)], grid[min(i + 1, len(grid) - 1)]
        best = minimize_scalar(lambda f: -self.true_rl_db(unit, [f], no_response)[0], bounds=(lo, hi),
                               method='bounded', options={'xatol': 100.0})
        f0 = float(best.x)
        depth = float(self.true_rl_db(unit, [f0])[0])
        return {'return_loss_db': [None if not np.isfinite(x) else float(x) for x in rl],
                'model': 'induced-emf-monopole', 'defect': unit.defect, 'f0_hz': f0, 'depth_db': depth,
                'element_length_mm': unit.length_mm, 'nominal_length_mm': self.nominal_length_mm}
