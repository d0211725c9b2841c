# The independent bench's fixture control port: one JSON object per line in, one per line out
# (put a standard or a unit in the socket, empty it, list the units, ground truth, status). The
# request and reply fields are the subset of echoline-sim's control port that echoline-score uses.
import json


class ControlPort:
    def __init__(self, world, instruments):
        self.world = world
        self.instruments = instruments   # role -> Instrument

    def handle(self, line):
        try:
            req = json.loads(line)
        except ValueError as e:
            return {'ok': False, 'error': f'control: not JSON: {e}'}
        if not isinstance(req, dict) or not isinstance(req.get('cmd'), str):
            return {'ok': False, 'error': 'control: expected an object with a "cmd" string'}
        try:
            return self._dispatch(req)
        except (KeyError, ValueError, TypeError) as e:
            return {'ok': False, 'error': f'control: {req["cmd"]}: {e.args[0] if e.args else e}'}

    def _dispatch(self, req):
        cmd, w = req['cmd'], self.world
        if cmd == 'connect':
            if 'standard' in req:
                w.connect_standard(req['standard'])
                return {'ok': True, 'connected': req['standard']}
            if 'unit' in req:
                w.connect_unit(req['unit'])
                return {'ok': True, 'connected': req['unit']}
            raise ValueError('needs "standard" or "unit"')
        if cmd == 'disconnect':
            w.disconnect()
            return {'ok': True, 'connected': None}
        if cmd == 'units':
            return {'ok': True, 'lot': w.lot.name, 'units': [u.serial for u in w.lot.units]}
        if cmd == 'truth':
            freqs = req.get('frequencies_hz', [])
            if not isinstance(freqs, list) or not all(isinstance(f, (int, float)) and f > 0 for f in freqs):
                raise ValueError('"frequencies_hz" must be a list of positive numbers')
            return dict(ok=True, unit=req['unit'], **w.lot.truth(w.lot.unit(req['unit']), freqs))
        if cmd == 'status':
            c = w.connected
            return {'ok': True, 'connected': None if c is None else c[1], 'arm': w.arm, 'lot': w.lot.name,
                    'sweeps': w.sweeps,
                    'source': {'on': w.source_on, 'frequency_hz': w.source_frequency_hz,
                               'power_dbm': w.source_power_dbm},
                    'instruments': {role: {'identity': i.identity, 'messages': i.messages}
                                    for role, i in self.instruments.items()}}
        raise ValueError(f'unknown cmd "{cmd}"; this bench knows connect, disconnect, units, truth, status')
