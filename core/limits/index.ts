export { type Limit } from './limit.ts';
export { t2LimitNew, t2LimitCalibration, t2LimitChi2, t2Limit, type T2Method } from './t2-limit.ts';
export {
  qLimitJacksonMudholkar,
  qLimitBox,
  qLimitBoxMoments,
  qMoments,
  jacksonMudholkarH0,
  qLimit,
  modelQLimit,
  type QMethod,
  type QLimitSetting,
} from './q-limit.ts';
export { combinedIndexLimit, combinedIndexParameters, combinedIndex, combinedLimit } from './combined-limit.ts';
