export { contributions, createContributionCalculator, type Contributions, type ContributionCalculator } from './contributions.ts';
export { sumOverRegions, type Region } from './regions.ts';
