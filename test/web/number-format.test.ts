import { describe, expect, it } from 'vitest';
import { age, clock, confidence, dateTime, eta, fixed, limitName, minutes, ofLimit, percent, sig, withUnit } from '../../web/src/format/number-format.ts';

describe('number formatting', () => {
  it('writes missing and non-finite values as a dash', () => {
    for (const v of [null, undefined, NaN, Infinity]) {
      expect(fixed(v as number, 2)).toBe('—');
      expect(sig(v as number)).toBe('—');
      expect(minutes(v as number)).toBe('—');
    }
  });
  it('uses a real minus sign and no negative zero', () => {
    expect(fixed(-1.5, 1)).toBe('−1.5');
    expect(fixed(-0.0001, 2)).toBe('0.00');
    expect(fixed(-3, 0)).toBe('−3');
  });
  it('keeps three significant digits across magnitudes', () => {
    expect(sig(1234.5)).toBe('1235');
    expect(sig(12.345)).toBe('12.3');
    expect(sig(0.012345)).toBe('0.0123');
    expect(sig(0.00012345)).toBe('1.23 × 10⁻⁴');
    expect(sig(2.5e7)).toBe('2.50 × 10⁷');
    expect(sig(0)).toBe('0');
    expect(sig(-0.5)).toBe('−0.500');
  });
  it('names limits with their confidence', () => {
    expect(confidence(0.99)).toBe('99 %');
    expect(confidence(0.999)).toBe('99.9 %');
    expect(confidence(0.95)).toBe('95 %');
    expect(limitName('T²', 0.99)).toBe('T² limit (99 %)');
    expect(limitName('Q', 0.95, 'local limit')).toBe('Q local limit (95 %)');
  });
  it('writes durations in s, min and h', () => {
    expect(minutes(0.5)).toBe('30 s');
    expect(minutes(4.25)).toBe('4.3 min');
    expect(minutes(42.4)).toBe('42 min');
    expect(minutes(65)).toBe('1 h 05 min');
    expect(minutes(119.8)).toBe('2 h 00 min');
    expect(minutes(-3)).toBe('−3.0 min');
  });
  it('writes time to endpoint with its spread', () => {
    expect(eta({ median: 12, low: 8, high: 17 })).toBe('≈ 12 min (8.0 min – 17 min)');
    expect(eta(null)).toBe('—');
  });
  it('formats clock and date in a given time zone', () => {
    const t = Date.UTC(2026, 11, 2, 14, 3, 27);
    expect(clock(t, 'UTC')).toBe('14:03:27');
    expect(dateTime(t, 'UTC')).toBe('2026-12-02 14:03');
    expect(dateTime(Date.UTC(2026, 0, 1, 0, 5), 'UTC')).toBe('2026-01-01 00:05');
  });
  it('writes ages, percentages, units and ratios', () => {
    expect(age(1000, 4000)).toBe('3 s ago');
    expect(age(0, 5 * 60_000)).toBe('5 min ago');
    expect(percent(0.423)).toBe('42 %');
    expect(percent(0.4236, 1)).toBe('42.4 %');
    expect(withUnit(1.8234, '% w/w')).toBe('1.82 % w/w');
    expect(withUnit(null, 'nm')).toBe('—');
    expect(ofLimit(4.2, 10)).toBe('0.42 × limit');
    expect(ofLimit(4.2, 0)).toBe('—');
  });
});

describe('share of limit', () => {
  it('writes a statistic as a percentage of its limit', async () => {
    const { ofLimitPct } = await import('../../web/src/format/number-format.ts');
    expect(ofLimitPct(1.14e-4, 3.1e-4)).toBe('37 % of limit');
    expect(ofLimitPct(25, 10)).toBe('250 % of limit');
    expect(ofLimitPct(2500, 10)).toBe('25000 % of limit');
    expect(ofLimitPct(1, 0)).toBe('—');
  });
});
