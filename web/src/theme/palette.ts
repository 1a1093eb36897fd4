/**
 * Tideline's palette. Hues from Okabe & Ito, "Color Universal Design" (2002/2008), chosen to be
 * distinguishable with the common colour-vision deficiencies. Colour is never the only cue: every
 * role also has a dash pattern or marker shape and a text label.
 */
export const OKABE_ITO = {
  black: '#000000',
  orange: '#E69F00',
  skyBlue: '#56B4E9',
  bluishGreen: '#009E73',
  yellow: '#F0E442',
  blue: '#0072B2',
  vermillion: '#D55E00',
  reddishPurple: '#CC79A7',
} as const;

export type MarkerShape = 'circle' | 'triangle-up' | 'triangle-down' | 'square' | 'diamond' | 'cross' | 'none';

export interface SeriesStyle {
  /** Text shown in legends. */
  label: string;
  stroke: string;
  /** Canvas dash pattern in CSS px; [] = solid. */
  dash: number[];
  width: number;
  marker: MarkerShape;
  fill?: string;
}

/** Roles used across the charts. Keep one meaning per style everywhere. */
export const STYLE = {
  /**
   * Width 1: live series hold up to tens of thousands of points, and software rasterizers (e.g.
   * Chromium without GPU) stroke 1-px lines an order of magnitude faster than wider ones.
   */
  batch: { label: 'this batch', stroke: OKABE_ITO.blue, dash: [], width: 1, marker: 'none' },
  goldenMean: { label: 'golden mean', stroke: '#333333', dash: [6, 4], width: 1.5, marker: 'none' },
  envelope: { label: 'golden envelope', stroke: 'rgba(86,180,233,0.9)', dash: [], width: 1, marker: 'none', fill: 'rgba(86,180,233,0.22)' },
  limit: { label: 'control limit', stroke: OKABE_ITO.vermillion, dash: [10, 4], width: 1.5, marker: 'none' },
  warnLimit: { label: 'warning limit', stroke: OKABE_ITO.orange, dash: [3, 3], width: 1.5, marker: 'none' },
  /** The limit that raises an alarm when it is above the drawn limits (the model's action limits). */
  alarmLimit: { label: 'alarm limit', stroke: OKABE_ITO.reddishPurple, dash: [14, 3, 2, 3], width: 1.5, marker: 'none' },
  outside: { label: 'outside limit', stroke: OKABE_ITO.vermillion, dash: [], width: 1, marker: 'triangle-up' },
  selected: { label: 'selected point', stroke: OKABE_ITO.reddishPurple, dash: [], width: 2, marker: 'diamond' },
  preprocessed: { label: 'preprocessed', stroke: OKABE_ITO.bluishGreen, dash: [], width: 1.5, marker: 'none' },
  reference: { label: 'reference batch', stroke: '#7a7a7a', dash: [2, 2], width: 1, marker: 'none' },
  excluded: { label: 'excluded sample', stroke: OKABE_ITO.vermillion, dash: [], width: 1, marker: 'cross' },
  /** A lab result (e.g. loss on drying) drawn on the predicted property. */
  lab: { label: 'lab value', stroke: OKABE_ITO.black, dash: [], width: 1, marker: 'square' },
  /** The property target of the endpoint rule. */
  target: { label: 'target', stroke: OKABE_ITO.bluishGreen, dash: [8, 4], width: 1.5, marker: 'none' },
} satisfies Record<string, SeriesStyle>;

/** Distinct styles for several batches overlaid (Review compare): colour + dash both vary. */
export const COMPARE_STYLES: SeriesStyle[] = [
  { label: 'batch 1', stroke: OKABE_ITO.blue, dash: [], width: 2, marker: 'none' },
  { label: 'batch 2', stroke: OKABE_ITO.vermillion, dash: [8, 3], width: 2, marker: 'none' },
  { label: 'batch 3', stroke: OKABE_ITO.bluishGreen, dash: [2, 2], width: 2, marker: 'none' },
  { label: 'batch 4', stroke: OKABE_ITO.reddishPurple, dash: [8, 3, 2, 3], width: 2, marker: 'none' },
  { label: 'batch 5', stroke: OKABE_ITO.orange, dash: [12, 4], width: 2, marker: 'none' },
];

/** Status words with a glyph and a colour; the word and glyph carry the meaning, the colour helps. */
export type StatusTone = 'ok' | 'info' | 'warn' | 'alarm' | 'muted';
export const TONE_COLOUR: Record<StatusTone, string> = {
  ok: OKABE_ITO.bluishGreen,
  info: OKABE_ITO.blue,
  warn: OKABE_ITO.orange,
  alarm: OKABE_ITO.vermillion,
  muted: '#6b6b6b',
};
export const TONE_GLYPH: Record<StatusTone, string> = {
  ok: '●',
  info: '◆',
  warn: '▲',
  alarm: '■',
  muted: '○',
};

/** Regions of band assignments alternate two hatch patterns so neighbours are told apart without colour. */
export const REGION_FILLS = ['rgba(230,159,0,0.16)', 'rgba(204,121,167,0.16)'];
