# SCPI message handling for the independent bench's instruments: program headers matched in
# short or long form (SCPI-1999 vol. 1, ch. 6, from memory: upper-case letters are the short
# form, case-insensitive, optional nodes in brackets, numeric suffixes), numeric parameters with
# unit suffixes, and the error queue. Pure; no I/O.
import re

_NUMBER = re.compile(r'^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*([A-Za-z]*)\s*$')


class ScpiError(Exception):
    def __init__(self, code, message):
        super().__init__(f'{code},"{message}"')
        self.code = code
        self.message = message


def _node(text):
    optional = text.startswith('[')
    word = text.strip('[]').lstrip(':')
    short = ''.join(c for c in word if c.isupper() or c.isdigit() or c == '*')
    return word.upper(), short.upper(), optional


class Pattern:
    """One command header, e.g. "[SOURce]:FREQuency[:FIXed]" or "CALCulate:MARKer#:LEVel?"
    (# : an optional numeric suffix; only the suffix 1 exists on these instruments)."""

    def __init__(self, text):
        self.query = text.endswith('?')
        body = text.rstrip('?')
        parts = re.findall(r'\[:?[A-Za-z*#]+\]|:?[A-Za-z*#]+', body)
        self.nodes = [_node(p) for p in parts]

    @staticmethod
    def _word_matches(token, long, short):
        suffix_ok = long.endswith('#')
        long, short = long.rstrip('#'), short.rstrip('#')
        m = re.fullmatch(r'([A-Z*]+?)(\d*)', token)
        if not m:
            return False
        word, digits = m.group(1), m.group(2)
        if digits and not (suffix_ok and int(digits) == 1):
            return False
        return word in (long, short)

    def matches(self, tokens, query):
        if query != self.query:
            return False

        def walk(i, j):
            if j == len(self.nodes):
                return i == len(tokens)
            long, short, optional = self.nodes[j]
            if i < len(tokens) and self._word_matches(tokens[i], long, short):
                if walk(i + 1, j + 1):
                    return True
            return optional and walk(i, j + 1)

        return walk(0, 0)


def split_message(line):
    """A program message -> [(header tokens, is_query, parameter text)], ';'-separated units."""
    out = []
    for unit in line.split(';'):
        unit = unit.strip()
        if not unit:
            continue
        head, _, params = unit.partition(' ')
        query = head.endswith('?')
        head = head.rstrip('?').upper()
        tokens = [t for t in head.split(':') if t] if not head.startswith('*') else [head]
        out.append((tokens, query, params.strip()))
    return out


def number(params, units, default_unit, what):
    """A numeric parameter with an optional unit suffix; `units` maps suffix -> factor to the base
    unit; a bare number is in `default_unit`. Raises ScpiError -104/-131 (IEEE 488.2 codes)."""
    m = _NUMBER.match(params)
    if not m:
        raise ScpiError(-104, f'Data type error;{what} expects a number, got "{params}"')
    value = float(m.group(1))
    unit = (m.group(2) or default_unit).upper()
    if unit not in units:
        raise ScpiError(-131, f'Invalid suffix;{m.group(2)} for {what}')
    return value * units[unit]


def boolean(params, what):
    p = params.strip().upper()
    if p in ('ON', '1'):
        return True
    if p in ('OFF', '0'):
        return False
    raise ScpiError(-224, f'Illegal parameter value;{what} takes ON|OFF|1|0, got "{params}"')


FREQUENCY_UNITS = {'HZ': 1.0, 'KHZ': 1e3, 'MHZ': 1e6, 'MAHZ': 1e6, 'GHZ': 1e9}
POWER_UNITS = {'DBM': 1.0}
DB_UNITS = {'DB': 1.0}
TIME_UNITS = {'S': 1.0, 'MS': 1e-3, 'US': 1e-6}


def nr3(x, digits=7):
    return f'{x:.{digits}E}'


class ErrorQueue:
    """SCPI error/event queue (SCPI-1999 vol. 2, ch. 21, from memory): FIFO, 10 entries here."""

    def __init__(self):
        self.entries = []

    def push(self, code, message):
        if len(self.entries) < 10:
            self.entries.append((code, message))
        else:
            self.entries[-1] = (-350, 'Queue overflow')

    def pop(self):
        if not self.entries:
            return '+0,"No error"'
        code, message = self.entries.pop(0)
        return f'{code},"{message}"'

    def clear(self):
        self.entries.clear()
