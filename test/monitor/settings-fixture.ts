/**
 * Build settings the monitor tests share: a small dryer model (3 PCs, progress on the predicted
 * moisture, a PLS moisture model, property + MBSD endpoint). Each test overrides what it is about.
 */
export const DRYER_TEST_SETTINGS = {
  name: 'test dryer model',
  product: 'granulate',
  author: 'test',
  createdAt: Date.UTC(2026, 0, 1),
  chain: [{ step: 'scale', center: true, scaling: 'none' }],
  components: 3,
  confidence: 0.99,
  progress: { kind: 'indicator', source: 'property' },
  envelope: { k: 3, smoothing: 2, points: 60 },
  alarms: { onDelay: 3, onWindow: 5, offDelay: 5, deadband: 0.05, startupMin: 2 },
  property: { name: 'moisture', unit: '% w/w', components: 3, target: 2, direction: 'below', chain: [{ step: 'msc' }, { step: 'scale', center: true, scaling: 'none' }], range: [0, 4] },
  endpoint: { criteria: [{ kind: 'property' }, { kind: 'mbsd', block: 5, threshold: 'auto' }], combine: 'any', confirm: 3, nearingMin: 10 },
};
