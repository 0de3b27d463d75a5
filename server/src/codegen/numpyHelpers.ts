// The private helpers of a generated NumPy module (phi1, crossing time, matrix exponential,
// optional inputs), emitted only where the module's functions call them. They mirror the C
// helpers of cfiles.ts line for line, so both targets compute the same numbers.
// Invariant: pure NumPy; no helper is emitted that the module does not use.

export function numpyHelpers(code: string): string[] {
  const out: string[] = [];
  if (code.includes('_phi1(')) {
    out.push('def _phi1(z):', '    """phi1(z) = (e^z - 1)/z with expm1 (no cancellation) and its series near 0 (as the step analysis)."""',
      '    z = np.asarray(z)', '    small = np.abs(z) < 1e-5', '    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):',
      '        value = np.where(small, 1 + z / 2 + z * z / 6, np.expm1(z) / np.where(small, 1.0, z))',
      '        return np.where(np.isinf(z), np.where(z > 0, z, 0.0), value)', '', '');
  }
  if (code.includes('_crossing_time(')) {
    out.push('def _crossing_time(g_start, g_end, t_start, dt):',
      '    """Crossing time inside [t_start, t_start + dt] by linear interpolation of the guard values."""',
      '    span = g_start - g_end', '    ok = (span != 0) & np.isfinite(span)', '    with np.errstate(invalid="ignore", divide="ignore"):',
      '        theta = np.clip(g_start / np.where(ok, span, 1.0), 0.0, 1.0)', '    return np.where(ok, t_start + theta * dt, t_start + dt)', '', '');
  }
  if (code.includes('_expm(')) {
    out.push('def _expm(m):', '    """e^m by scaling and squaring of the Taylor series, carried as e = I + g (as in the C code)."""',
      '    m = np.asarray(m, dtype=np.float64)', '    norm = np.abs(m).sum(axis=0).max()', '    s = 0', '    while norm > 0.5 and s < 1000:',
      '        norm /= 2', '        s += 1', '    x = np.ldexp(m, -s)', '    term = x.copy()', '    g = x.copy()',
      '    for k in range(2, 25):', '        term = term @ x / k', '        g = g + term',
      '    for _ in range(s):', '        g = 2 * g + g @ g', '    return np.eye(len(m)) + g', '', '');
  }
  if (code.includes('_value(')) {
    out.push('def _value(arrays, name):', '    """arrays[name] as an array, or 0 where arrays or the entry is None."""',
      '    if arrays is None or arrays.get(name) is None:', '        return 0.0', '    return np.asarray(arrays[name])', '', '');
  }
  return out;
}
