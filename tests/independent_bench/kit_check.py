#!/usr/bin/python3
# Checks that kit.jsonc truly holds the independent bench's standards and offset line: each as the
# bench makes it (bench.jsonc, fixture.py, coax_line.py, skrf) against the kit's figures, the
# standards over 700-1200 MHz, the line over 860-970 MHz. Exit 0 when all hold, 1 when one does not.
import contextlib
import io
import os
import re
import sys

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
with contextlib.redirect_stdout(io.StringIO()):   # skrf prints a note when matplotlib is absent
    import fixture
from bench_config import load_bench_config, load_jsonc  # noqa: E402
from coax_line import CoaxLine  # noqa: E402

LINE_BAND_HZ = (860e6, 970e6)   # where kit.jsonc states the offset line (the pair recipes' sweep)

Z0 = fixture.Z0


def hz(value):
    """A kit frequency: a number in Hz or a string such as "1.2 GHz"."""
    if isinstance(value, (int, float)):
        return float(value)
    m = re.fullmatch(r'\s*([0-9.eE+-]+)\s*(Hz|kHz|MHz|GHz)\s*', value)
    if not m:
        raise ValueError(f'not a frequency: {value!r}')
    return float(m.group(1)) * {'Hz': 1, 'kHz': 1e3, 'MHz': 1e6, 'GHz': 1e9}[m.group(2)]


def kit_model(kind, entry, f):
    """The kit's nominal reflection: a shunt fringe capacitance at an open end, a series inductance
    at a short, each behind a lossless offset line of Z0 (lumped and offset-line standard models:
    common practice, no source)."""
    w = 2 * np.pi * f
    if kind == 'open':
        zc = 1 / (1j * w * entry.get('fringe_capacitance_ff', 0) * 1e-15)
        end = (zc - Z0) / (zc + Z0)
    else:
        zl = 1j * w * entry.get('inductance_ph', 0) * 1e-12
        end = (zl - Z0) / (zl + Z0)
    return end * np.exp(-2j * w * entry.get('offset_delay_ps', 0) * 1e-12)


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    bench = load_bench_config(os.path.join(here, 'bench.jsonc'))
    kit = load_jsonc(os.path.join(here, 'kit.jsonc'))
    f = np.linspace(700e6, 1200e6, 5001)
    freq = fixture.frequency(f)
    standards = fixture.Standards(bench['standards'])
    ok = True
    for kind in ('open', 'short'):
        entry = kit[kind]
        actual = standards.by_name(kind.upper(), freq).s[:, 0, 0]
        magnitude = np.abs(actual)
        phase_error = np.degrees(np.abs(np.angle(actual / kit_model(kind, entry, f))))
        holds = magnitude.min() >= entry['min_magnitude'] and phase_error.max() <= entry['phase_tolerance_deg']
        ok &= bool(holds)
        print(f'{kind.upper():5}  |G| {magnitude.min():.4f} (kit: at least {entry["min_magnitude"]}), '
              f'phase off the model by at most {phase_error.max():.3f} deg (kit: {entry["phase_tolerance_deg"]} deg)'
              f'  {"holds" if holds else "DOES NOT HOLD"}')
    actual_rl = -20 * np.log10(np.abs(standards.load(freq).s[:, 0, 0]))
    low = 0.0
    for step in kit['load']['worst_return_loss']:
        top = hz(step['up_to_hz'])
        inside = (f > low) & (f <= top)
        if inside.any():
            worst = actual_rl[inside].min()
            holds = worst >= step['return_loss_db']
            ok &= bool(holds)
            print(f'LOAD   {low / 1e6:.0f}-{top / 1e6:.0f} MHz: worst return loss {worst:.2f} dB '
                  f'(kit: at least {step["return_loss_db"]} dB)  {"holds" if holds else "DOES NOT HOLD"}')
        low = top
    if low < f[-1]:
        print(f'LOAD   above {low / 1e6:.0f} MHz: unknown to the kit (the station takes |G| up to 1)')
    ok &= check_offset_line(bench['offset_line'], kit['offset_line'])
    return 0 if ok else 1


def check_offset_line(line_params, entry):
    """The line's delay, loss and match at every frequency of LINE_BAND_HZ on a 10 kHz grid (it
    holds every plan point of the pair recipes, 0.5 MHz apart) against the kit's figures."""
    f = np.arange(LINE_BAND_HZ[0], LINE_BAND_HZ[1] + 1, 10e3)
    g = CoaxLine(line_params).figures(f)
    band = f'{LINE_BAND_HZ[0] / 1e6:.0f}-{LINE_BAND_HZ[1] / 1e6:.0f} MHz'
    ok = True
    delay_ps = g['delay_s'] * 1e12
    off = np.abs(delay_ps - entry['delay_ps'])
    holds = off.max() <= entry['delay_tolerance_ps']
    ok &= bool(holds)
    print(f'LINE   {band}: delay {delay_ps.min():.3f} to {delay_ps.max():.3f} ps, at most {off.max():.3f} ps off '
          f'{entry["delay_ps"]} ps (kit: +- {entry["delay_tolerance_ps"]} ps)  {"holds" if holds else "DOES NOT HOLD"}')
    off = np.abs(g['loss_db'] - entry['loss_db'])
    holds = off.max() <= entry['loss_tolerance_db']
    ok &= bool(holds)
    print(f'LINE   {band}: loss {g["loss_db"].min():.4f} to {g["loss_db"].max():.4f} dB, at most {off.max():.4f} dB '
          f'off {entry["loss_db"]} dB (kit: +- {entry["loss_tolerance_db"]} dB)  {"holds" if holds else "DOES NOT HOLD"}')
    rl = g['match_return_loss_db']
    holds = rl.min() >= entry['match_return_loss_db']
    ok &= bool(holds)
    print(f'LINE   {band}: worst return loss of either end {rl.min():.2f} dB at {f[np.argmin(rl)] / 1e6:.2f} MHz '
          f'(kit: at least {entry["match_return_loss_db"]} dB)  {"holds" if holds else "DOES NOT HOLD"}')
    return ok


if __name__ == '__main__':
    sys.exit(main())
