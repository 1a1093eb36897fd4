/** A sentence under the field it concerns (a form check or a refused build). */
export function FieldError({ text, id }: { text: string | undefined; id?: string }) {
  if (!text) return null;
  return (
    <p class="field-error" role="alert" id={id} data-testid="field-error">
      <span aria-hidden="true">▲ </span>
      {text}
    </p>
  );
}
