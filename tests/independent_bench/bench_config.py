# The independent bench's files: JSON with // and /* */ comments, and the bench file's keys
# (coupler, standards, offset line, receiver, seed). Errors name the file, the line or the key.
import json

SCHEMA = {
    'name': str, 'seed': int,
    'coupler': {k: float for k in (
        'coupling_db', 'coupling_slope_db_per_ghz', 'mainline_loss_db', 'cable_loss_db_at_1ghz', 'cable_delay_ns',
        'tracking_phase_rad', 'directivity_db', 'directivity_ripple_db', 'directivity_ripple_period_mhz',
        'directivity_delay_ns', 'directivity_phase_rad', 'source_match_db', 'source_match_ripple_db',
        'source_match_ripple_period_mhz', 'source_match_phase_rad')},
    'standards': {
        'open': {k: float for k in ('magnitude', 'fringe_capacitance_ff', 'offset_delay_ps')},
        'short': {k: float for k in ('magnitude', 'inductance_ph', 'offset_delay_ps')},
        'load': {k: float for k in ('resistance_ohm', 'inductance_nh')}},
    'offset_line': {k: float for k in (
        'characteristic_impedance_ohm', 'delay_ps', 'conductor_loss_db_at_1ghz', 'loss_tangent',
        'near_end_capacitance_pf', 'far_end_capacitance_pf')},
    'receiver': {k: float for k in ('reading_noise_db', 'noise_figure_db', 'trace_points')},
}


class ConfigError(ValueError):
    pass


def strip_comments(text):
    out, i, n, in_str = [], 0, len(text), False
    while i < n:
        c = text[i]
        if in_str:
            out.append(c)
            if c == '\\' and i + 1 < n:
                out.append(text[i + 1])
                i += 1
            elif c == '"':
                in_str = False
        elif c == '"':
            in_str = True
            out.append(c)
        elif text.startswith('//', i):
            while i < n and text[i] != '\n':
                i += 1
            continue
        elif text.startswith('/*', i):
            end = text.find('*/', i + 2)
            if end < 0:
                raise ConfigError('unterminated /* comment')
            out.append('\n' * text.count('\n', i, end))   # keep line numbers
            i = end + 2
            continue
        else:
            out.append(c)
        i += 1
    return ''.join(out)


def load_jsonc(path):
    with open(path, encoding='utf-8') as f:
        text = f.read()
    try:
        return json.loads(strip_comments(text))
    except ConfigError as e:
        raise ConfigError(f'{path}: {e}')
    except json.JSONDecodeError as e:
        raise ConfigError(f'{path}:{e.lineno}: {e.msg}')


def _check(value, schema, path, file):
    if isinstance(schema, dict):
        if not isinstance(value, dict):
            raise ConfigError(f'{file}: {path or "/"}: expected an object')
        for key in value:
            if key not in schema:
                raise ConfigError(f'{file}: {path}/{key}: unknown key; allowed: {", ".join(schema)}')
        for key, sub in schema.items():
            if key not in value:
                raise ConfigError(f'{file}: {path}/{key}: missing')
            _check(value[key], sub, f'{path}/{key}', file)
    elif schema is float:
        if not isinstance(value, (int, float)) or isinstance(value, bool):
            raise ConfigError(f'{file}: {path}: expected a number, found {json.dumps(value)}')
    elif schema is int:
        if not isinstance(value, int) or isinstance(value, bool):
            raise ConfigError(f'{file}: {path}: expected a whole number, found {json.dumps(value)}')
    elif not isinstance(value, schema):
        raise ConfigError(f'{file}: {path}: expected a {schema.__name__}, found {json.dumps(value)}')


def load_bench_config(path):
    doc = load_jsonc(path)
    _check(doc, SCHEMA, '', path)
    return doc
