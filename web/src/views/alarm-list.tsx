/** The alarm list with acknowledge and shelve (ISA-18.2 states in words, glyphs and colour). */
import { useState } from 'preact/hooks';
import type { Alarm } from '../../../core/api/rest.ts';
import { api } from '../api/endpoints.ts';
import { errorText } from '../api/problem.ts';
import { alarmTimes, alarmTitle, orderAlarms } from './alarm-data.ts';
import { Advisory, Badge, ErrorBox } from '../components/status.tsx';
import { PRIORITY_WORDS, alarmWords } from '../format/status-words.ts';
import { clock, sig } from '../format/number-format.ts';
import { DEFAULT_ALARM_SETTINGS } from '../../../core/alarms/types.ts';

export function AlarmList({
  alarms,
  now,
  title = 'Alarms',
  currentBatch = null,
  onChanged,
}: {
  alarms: Alarm[];
  now: number;
  title?: string;
  currentBatch?: string | null;
  /** Called after an acknowledge or shelve where the list is not fed live (Review). */
  onChanged?: () => void;
}) {
  const list = orderAlarms(alarms, currentBatch);
  // one group per batch, in the order of the list (the running batch first)
  const groups: { batch: string | null; alarms: Alarm[]; unacked: Alarm[] }[] = [];
  for (const a of list) {
    let g = groups.find((x) => x.batch === a.batch);
    if (!g) groups.push((g = { batch: a.batch, alarms: [], unacked: [] }));
    g.alarms.push(a);
    if (a.state === 'active-unacknowledged' || a.state === 'cleared-unacknowledged') g.unacked.push(a);
  }
  const [error, setError] = useState<string | null>(null);
  const [shelving, setShelving] = useState<string | null>(null);
  const [busy, setBusy] = useState<string | null>(null);
  const act = async (id: string, f: () => Promise<unknown>) => {
    setBusy(id);
    setError(null);
    try {
      await f();
      onChanged?.();
    } catch (e) {
      setError(errorText(e));
    } finally {
      setBusy(null);
    }
  };
  return (
    <div class="panel alarms" data-testid="alarm-list">
      <div class="panel-head">
        <h2>{title}</h2>
        <span class="muted">{list.filter((a) => a.state !== 'normal').length} open</span>
      </div>
      {error && <ErrorBox message={error} />}
      {list.length === 0 && <p class="muted">No alarms.</p>}
      {groups.map((g) => (
        <div class="alarm-group" key={g.batch ?? '-'} data-testid={`alarm-group-${g.batch ?? 'none'}`}>
          {groups.length > 1 || g.unacked.length > 1 ? (
            <div class="alarm-group-head small">
              <b>{g.batch === null ? 'No batch' : g.batch === currentBatch ? `This batch (${g.batch})` : `Earlier batch ${g.batch}`}</b>
              <span>
                {g.alarms.length} alarm{g.alarms.length === 1 ? '' : 's'}
                {g.unacked.length > 0 && `, ${g.unacked.length} to acknowledge`}
              </span>
              {g.unacked.length > 1 && (
                <button
                  type="button"
                  class="btn small"
                  disabled={busy !== null}
                  title="One acknowledgement for the group, recorded once in the Ledger with the alarms it covers; each alarm moves on as if acknowledged alone."
                  data-testid="acknowledge-group"
                  onClick={() => act(`group:${g.batch}`, () => api.acknowledgeGroup(g.unacked.map((a) => a.id)))}
                >
                  Acknowledge these {g.unacked.length} (one action)
                </button>
              )}
            </div>
          ) : null}
          <ul class="alarm-rows">
            {g.alarms.map((a) => {
              const w = alarmWords(a, now);
              const unack = a.state === 'active-unacknowledged' || a.state === 'cleared-unacknowledged';
              return (
                <li key={a.id} class={`alarm-row state-${a.state}`} data-testid={`alarm-${a.id}`}>
                  <div class="alarm-line">
                    <Badge tone={w.tone}>{w.text}</Badge>
                    <span class="prio">{PRIORITY_WORDS[a.priority]}</span>
                    <b data-testid="alarm-name">{alarmTitle(a)}</b>
                    <span class="alarm-batch small" data-testid="alarm-batch">
                      {a.batch === null ? 'no batch' : a.batch === currentBatch ? `this batch (${a.batch})` : `earlier batch ${a.batch}`}
                    </span>
                    {a.chattering && (
                      <Badge tone="warn" title={`${a.recentActivations ?? 3} activations within the last minute (ANSI/ISA-18.2: ≥ 3 a minute is chattering)`}>
                        chattering ×{a.recentActivations}
                      </Badge>
                    )}
                  </div>
                  <div class="alarm-msg">{a.message}</div>
                  <div class="alarm-meta muted small">
                    {alarmTimes(a, now)}
                    {/* pace is judged on log time; its message gives the minutes, the one pace figure shown */}
                    {a.value !== null && a.limit !== null && a.key !== 'pace' && ` · value ${sig(a.value)} / limit ${sig(a.limit)}`}
                    {a.acknowledgedBy && ` · acknowledged by ${a.acknowledgedBy} ${clock(a.acknowledgedAt)}`}
                    {a.shelvedUntil && a.shelvedUntil > now && ` · shelved by ${a.shelvedBy ?? '?'} until ${clock(a.shelvedUntil)}: ${a.shelveReason ?? ''}`}
                  </div>
                  <div class="alarm-actions">
                    {unack && (
                      <button type="button" class="btn small primary" disabled={busy === a.id} onClick={() => act(a.id, () => api.acknowledge(a.id))}>
                        Acknowledge
                      </button>
                    )}
                    {a.shelvedUntil && a.shelvedUntil > now ? (
                      <button type="button" class="btn small" disabled={busy === a.id} onClick={() => act(a.id, () => api.unshelve(a.id))}>
                        Unshelve
                      </button>
                    ) : (
                      a.state !== 'normal' && (
                        <button type="button" class="btn small" onClick={() => setShelving(shelving === a.id ? null : a.id)}>
                          Shelve…
                        </button>
                      )
                    )}
                  </div>
                  {shelving === a.id && (
                    <ShelveForm
                      onCancel={() => setShelving(null)}
                      onShelve={(minutes, reason) =>
                        act(a.id, async () => {
                          await api.shelve(a.id, minutes, reason);
                          setShelving(null);
                        })
                      }
                    />
                  )}
                </li>
              );
            })}
          </ul>
        </div>
      ))}
      <Advisory />
    </div>
  );
}

/** The longest shelve the server accepts: one shift (core/alarms default). */
const MAX_SHELVE_MIN = DEFAULT_ALARM_SETTINGS.maxShelveMs / 60_000;

function ShelveForm({ onShelve, onCancel }: { onShelve: (minutes: number, reason: string) => void; onCancel: () => void }) {
  const [minutes, setMinutes] = useState(30);
  const [reason, setReason] = useState('');
  return (
    <form
      class="shelve-form"
      onSubmit={(e) => {
        e.preventDefault();
        onShelve(minutes, reason);
      }}
    >
      <label>
        for{' '}
        <input type="number" min={1} max={MAX_SHELVE_MIN} value={minutes} onInput={(e) => setMinutes(Number((e.target as HTMLInputElement).value))} required /> min
      </label>
      <label>
        reason <input type="text" value={reason} onInput={(e) => setReason((e.target as HTMLInputElement).value)} required placeholder="why this alarm may be set aside" />
      </label>
      <button type="submit" class="btn small primary">
        Shelve
      </button>
      <button type="button" class="btn small" onClick={onCancel}>
        Cancel
      </button>
    </form>
  );
}
