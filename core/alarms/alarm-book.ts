/**
 * One unit's alarms and the operations on them. Pure: each operation takes a book and returns a
 * new book plus the events it caused; the input book is not changed. Times are passed in.
 *
 * Shelving and suppression take an alarm out of annunciation: its state reads 'normal' while
 * hidden (nothing to acknowledge) and the process condition is still tracked; on return the alarm
 * is re-evaluated (ISA-18.2: back to normal, then active-unacknowledged if the condition holds).
 */
import type { AlarmPriority } from '../monitor/types.ts';
import { activationsInWindow } from './chattering.ts';
import { stateOnAcknowledge, stateOnCondition, stateOnReturn } from './life-cycle.ts';
import {
  AlarmActionError,
  DEFAULT_ALARM_SETTINGS,
  type AlarmBook,
  type AlarmCause,
  type AlarmCondition,
  type AlarmContext,
  type AlarmEvent,
  type AlarmRecord,
  type AlarmSettings,
  type AlarmStep,
  type SuppressionReason,
} from './types.ts';

export function createAlarmBook(unit: string, context: AlarmContext = { batchRunning: false, functionCheck: false }): AlarmBook {
  return { unit, context: { ...context }, alarms: {} };
}

function cloneRecord(r: AlarmRecord): AlarmRecord {
  return { ...r, shelved: r.shelved ? { ...r.shelved } : null, suppressedBy: [...r.suppressedBy], activations: [...r.activations] };
}

function cloneBook(b: AlarmBook): AlarmBook {
  const alarms: Record<string, AlarmRecord> = {};
  for (const [k, r] of Object.entries(b.alarms)) alarms[k] = cloneRecord(r);
  return { unit: b.unit, context: { ...b.context }, alarms };
}

export function isAnnunciated(r: AlarmRecord): boolean {
  return r.shelved === null && r.suppressedBy.length === 0;
}

/** Reasons (ISA-18.2 designed suppression) for which an alarm of this kind is hidden in this context. */
export function suppressionFor(kind: AlarmRecord['kind'], ctx: AlarmContext, s: AlarmSettings): SuppressionReason[] {
  const out: SuppressionReason[] = [];
  if (!ctx.batchRunning && s.suppressWithoutBatch.includes(kind)) out.push('no-batch');
  if (ctx.functionCheck && s.suppressInFunctionCheck.includes(kind)) out.push('function-check');
  return out;
}

function changed(a: AlarmRecord, b: AlarmRecord): boolean {
  return (
    a.state !== b.state ||
    a.conditionActive !== b.conditionActive ||
    (a.shelved === null) !== (b.shelved === null) ||
    (a.shelved !== null && b.shelved !== null && a.shelved.until !== b.shelved.until) ||
    a.suppressedBy.join(',') !== b.suppressedBy.join(',') ||
    a.chattering !== b.chattering
  );
}

function eventOf(unit: string, before: AlarmRecord, after: AlarmRecord, cause: AlarmCause, t: number, extra?: { user?: string; reason?: string }): AlarmEvent {
  const e: AlarmEvent = {
    type: 'alarm',
    unit,
    key: after.key,
    kind: after.kind,
    priority: after.priority,
    from: before.state,
    to: after.state,
    cause,
    t,
    conditionActive: after.conditionActive,
    shelved: after.shelved ? { ...after.shelved } : null,
    suppressedBy: [...after.suppressedBy],
    chattering: after.chattering,
    message: after.message,
    value: after.value,
    limit: after.limit,
  };
  if (extra?.user !== undefined) e.user = extra.user;
  if (extra?.reason !== undefined) e.reason = extra.reason;
  return e;
}

function requireTime(t: number): void {
  if (!Number.isFinite(t)) throw new AlarmActionError(`time must be a finite number of ms, got ${t}`);
}

function requireAlarm(book: AlarmBook, key: string): AlarmRecord {
  const r = book.alarms[key];
  if (!r) throw new AlarmActionError(`unit ${book.unit} has no alarm '${key}'`);
  return r;
}

function updateChattering(r: AlarmRecord, t: number, s: AlarmSettings): void {
  r.activations = activationsInWindow(r.activations, t, s.chatterWindowMs);
  r.chattering = r.activations.length >= s.chatterActivations;
}

/** Feed a condition change (from the monitor, or a server-side stale/analyzer condition). */
export function applyCondition(book: AlarmBook, cond: AlarmCondition, t: number, settings: AlarmSettings = DEFAULT_ALARM_SETTINGS): AlarmStep {
  requireTime(t);
  if (!cond.key) throw new AlarmActionError('condition has no key');
  if (![1, 2, 3, 4].includes(cond.priority)) throw new AlarmActionError(`condition '${cond.key}': priority must be 1–4, got ${cond.priority}`);
  const next = cloneBook(book);
  const existing = next.alarms[cond.key];
  const before: AlarmRecord = existing
    ? cloneRecord(existing)
    : {
        key: cond.key,
        kind: cond.kind,
        priority: cond.priority as AlarmPriority,
        state: 'normal',
        conditionActive: false,
        message: cond.message,
        value: cond.value,
        limit: cond.limit,
        activeSince: null,
        lastChangeAt: t,
        ackedBy: null,
        ackedAt: null,
        shelved: null,
        suppressedBy: suppressionFor(cond.kind, next.context, settings),
        activations: [],
        chattering: false,
      };
  const r = cloneRecord(before);
  r.message = cond.message;
  r.value = cond.value;
  r.limit = cond.limit;
  r.priority = cond.priority as AlarmPriority;
  if (cond.active !== r.conditionActive) {
    r.conditionActive = cond.active;
    r.lastChangeAt = t;
    if (cond.active) {
      r.activeSince = t;
      r.activations.push(t);
    } else {
      r.activeSince = null;
    }
    if (isAnnunciated(r)) {
      const s = stateOnCondition(r.state, cond.active);
      if (s !== r.state && s === 'active-unacknowledged') {
        r.ackedBy = null;
        r.ackedAt = null;
      }
      r.state = s;
    }
  }
  updateChattering(r, t, settings);
  next.alarms[r.key] = r;
  const events = changed(before, r) || !existing ? [eventOf(next.unit, before, r, 'condition', t)] : [];
  return { book: next, events };
}

export function acknowledge(book: AlarmBook, key: string, action: { t: number; user: string; comment?: string }): AlarmStep {
  requireTime(action.t);
  if (!action.user) throw new AlarmActionError('acknowledge needs a user');
  const before = requireAlarm(book, key);
  const s = stateOnAcknowledge(before.state);
  if (s === null) throw new AlarmActionError(`alarm '${key}' on ${book.unit} is ${before.state}${before.shelved ? ' (shelved)' : ''}: nothing to acknowledge`);
  const next = cloneBook(book);
  const r = next.alarms[key]!;
  r.state = s;
  r.ackedBy = action.user;
  r.ackedAt = action.t;
  r.lastChangeAt = action.t;
  return { book: next, events: [eventOf(next.unit, before, r, 'acknowledge', action.t, { user: action.user, reason: action.comment })] };
}

export function shelve(
  book: AlarmBook,
  key: string,
  action: { t: number; user: string; durationMs: number; reason: string },
  settings: AlarmSettings = DEFAULT_ALARM_SETTINGS,
): AlarmStep {
  requireTime(action.t);
  if (!action.user) throw new AlarmActionError('shelve needs a user');
  if (!action.reason || !action.reason.trim()) throw new AlarmActionError('shelve needs a reason');
  if (!Number.isFinite(action.durationMs) || action.durationMs <= 0)
    throw new AlarmActionError(`shelve duration must be a positive number of ms, got ${action.durationMs}`);
  if (action.durationMs > settings.maxShelveMs)
    throw new AlarmActionError(`shelve duration ${Math.round(action.durationMs / 60000)} min exceeds the maximum of ${Math.round(settings.maxShelveMs / 60000)} min`);
  const before = requireAlarm(book, key);
  const next = cloneBook(book);
  const r = next.alarms[key]!;
  r.shelved = { by: action.user, at: action.t, until: action.t + action.durationMs, reason: action.reason.trim() };
  r.state = 'normal';
  r.lastChangeAt = action.t;
  return { book: next, events: [eventOf(next.unit, before, r, 'shelve', action.t, { user: action.user, reason: r.shelved.reason })] };
}

function returnFromShelf(book: AlarmBook, key: string, t: number, cause: 'unshelve' | 'shelve-expired', extra?: { user?: string; reason?: string }): AlarmStep {
  const before = requireAlarm(book, key);
  if (!before.shelved) throw new AlarmActionError(`alarm '${key}' on ${book.unit} is not shelved`);
  const next = cloneBook(book);
  const r = next.alarms[key]!;
  r.shelved = null;
  if (isAnnunciated(r)) r.state = stateOnReturn(r.conditionActive);
  r.lastChangeAt = t;
  return { book: next, events: [eventOf(next.unit, before, r, cause, t, extra)] };
}

export function unshelve(book: AlarmBook, key: string, action: { t: number; user: string; reason?: string }): AlarmStep {
  requireTime(action.t);
  if (!action.user) throw new AlarmActionError('unshelve needs a user');
  return returnFromShelf(book, key, action.t, 'unshelve', { user: action.user, reason: action.reason });
}

/** Change the operating context (batch running, function check); suppresses or releases alarms. */
export function setContext(book: AlarmBook, context: AlarmContext, t: number, settings: AlarmSettings = DEFAULT_ALARM_SETTINGS): AlarmStep {
  requireTime(t);
  const next = cloneBook(book);
  next.context = { ...context };
  const events: AlarmEvent[] = [];
  for (const key of Object.keys(next.alarms).sort()) {
    const before = book.alarms[key]!;
    const r = next.alarms[key]!;
    const sup = suppressionFor(r.kind, context, settings);
    if (sup.join(',') === r.suppressedBy.join(',')) continue;
    const wasHidden = !isAnnunciated(r);
    r.suppressedBy = sup;
    const hidden = !isAnnunciated(r);
    if (!wasHidden && hidden) r.state = 'normal';
    else if (wasHidden && !hidden) r.state = stateOnReturn(r.conditionActive);
    r.lastChangeAt = t;
    events.push(eventOf(next.unit, before, r, sup.length > before.suppressedBy.length ? 'suppress' : 'unsuppress', t));
  }
  return { book: next, events };
}

/** Advance time: expire shelves whose time is up and let the chattering flag decay. */
export function tick(book: AlarmBook, t: number, settings: AlarmSettings = DEFAULT_ALARM_SETTINGS): AlarmStep {
  requireTime(t);
  let cur = book;
  const events: AlarmEvent[] = [];
  for (const key of Object.keys(book.alarms).sort()) {
    const r = cur.alarms[key]!;
    if (r.shelved && r.shelved.until <= t) {
      const step = returnFromShelf(cur, key, r.shelved.until, 'shelve-expired', { reason: 'shelve time ended' });
      cur = step.book;
      events.push(...step.events);
    }
    const r2 = cur.alarms[key]!;
    const inWindow = activationsInWindow(r2.activations, t, settings.chatterWindowMs);
    const chattering = inWindow.length >= settings.chatterActivations;
    if (chattering !== r2.chattering || inWindow.length !== r2.activations.length) {
      const next = cloneBook(cur);
      const before = cur.alarms[key]!;
      const r3 = next.alarms[key]!;
      r3.activations = inWindow;
      r3.chattering = chattering;
      cur = next;
      if (chattering !== before.chattering) events.push(eventOf(next.unit, before, r3, 'chattering', t));
    }
  }
  return { book: cur, events };
}

/** Alarms that want the operator's attention: annunciated and not normal, by priority then time. */
export function standingAlarms(book: AlarmBook): AlarmRecord[] {
  return Object.values(book.alarms)
    .filter((r) => isAnnunciated(r) && r.state !== 'normal')
    .sort((a, b) => a.priority - b.priority || a.lastChangeAt - b.lastChangeAt || a.key.localeCompare(b.key));
}
