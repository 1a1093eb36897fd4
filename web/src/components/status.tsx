/** Loading, empty and error states, and small status badges (glyph + word + colour). */
import type { ComponentChildren } from 'preact';
import type { StatusTone } from '../theme/palette.ts';
import { TONE_COLOUR, TONE_GLYPH } from '../theme/palette.ts';

export function Loading({ what }: { what: string }) {
  return (
    <div class="state state-loading" role="status" aria-live="polite">
      <span class="spinner" aria-hidden="true" /> Loading {what}…
    </div>
  );
}

export function Empty({ children }: { children: ComponentChildren }) {
  return <div class="state state-empty">{children}</div>;
}

export function ErrorBox({ message, onRetry }: { message: string; onRetry?: () => void }) {
  return (
    <div class="state state-error" role="alert">
      <strong>■ Problem:</strong> {message}
      {onRetry && (
        <button type="button" class="btn small" onClick={onRetry}>
          Try again
        </button>
      )}
    </div>
  );
}

export function Badge({ tone, children, title }: { tone: StatusTone; children: ComponentChildren; title?: string }) {
  return (
    <span class={`badge tone-${tone}`} style={{ borderColor: TONE_COLOUR[tone] }} title={title}>
      <span aria-hidden="true" style={{ color: TONE_COLOUR[tone] }}>
        {TONE_GLYPH[tone]}
      </span>{' '}
      {children}
    </span>
  );
}

export const ADVISORY = "Tideline advises; the site's validated control strategy, interlocks and procedures decide what a signal may do.";

export function Advisory({ text }: { text?: string }) {
  return (
    <p class="advisory" role="note">
      <span aria-hidden="true">⚠</span> {text || ADVISORY}
    </p>
  );
}
