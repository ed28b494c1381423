/** Scenario simulation: invented streams from known subpopulations, with ground truth. Pure, no I/O. */
export * from './families.js';
export * from './scenario.js';
export { simulate, type GroundTruth, type SimRecord, type SimulationRun, type StreamTruth, type TruthChange, type TruthKind } from './generator.js';
export { SCENARIOS, SCENARIO_NAMES, buildScenario, type SuiteEntry, type SuiteOptions } from './suite.js';
