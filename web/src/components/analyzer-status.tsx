/** The analyzer's NAMUR NE 107 status as a badge: the category in words, a glyph and an Okabe–Ito colour. */
import type { AnalyzerStatusView } from '../../../core/api/rest.ts';
import type { StatusTone } from '../theme/palette.ts';
import { Badge } from './status.tsx';

const NE107: Record<AnalyzerStatusView['status'], { tone: StatusTone; words: string }> = {
  good: { tone: 'ok', words: 'analyzer good' },
  failure: { tone: 'alarm', words: 'analyzer failure (F)' },
  'function-check': { tone: 'info', words: 'analyzer in function check (C)' },
  'out-of-specification': { tone: 'warn', words: 'analyzer out of specification (S)' },
  'maintenance-required': { tone: 'warn', words: 'analyzer needs maintenance (M)' },
};

export function AnalyzerStatusBadge({ status, suppressed }: { status: AnalyzerStatusView | null | undefined; suppressed?: readonly string[] }) {
  if (!status) return null;
  const s = NE107[status.status];
  const what = [status.code, status.detail].filter(Boolean).join(': ');
  const hidden = suppressed?.includes('function-check') ? ' · alarms suppressed' : '';
  return (
    <Badge tone={s.tone} title={`NAMUR NE 107 status reported by analyzer ${status.analyzer}${what ? ` — ${what}` : ''}`}>
      <span data-testid="analyzer-status">
        {s.words}
        {what ? ` · ${what}` : ''}
        {hidden}
      </span>
    </Badge>
  );
}
