/** One problem found in a circuit description. */
export interface CircuitIssue {
  /** Id of the offending element (or node name, or "circuit"). */
  readonly element: string;
  /** Short machine-readable code. */
  readonly code: string;
  /** Human-readable reason. */
  readonly message: string;
}

/** Thrown when a circuit description is invalid; carries every issue found, not only the first. */
export class CircuitError extends Error {
  readonly issues: readonly CircuitIssue[];
  constructor(issues: readonly CircuitIssue[]) {
    super(
      issues.length === 1
        ? `invalid circuit: ${issues[0]!.element}: ${issues[0]!.message}`
        : `invalid circuit (${issues.length} issues):\n` +
            issues.map((i) => `  - ${i.element}: ${i.message}`).join('\n'),
    );
    this.name = 'CircuitError';
    this.issues = issues;
  }
}

/** Codes of failures that can happen during a run. */
export type SimulationErrorCode =
  | 'shoot-through'
  | 'voltage-loop'
  | 'no-freewheeling-path'
  | 'floating-current-source'
  | 'inconsistent-switching'
  | 'chattering'
  | 'non-finite'
  | 'singular-network'
  | 'controller';

/** A failure during a run: names the devices, the time and the reason. */
export class SimulationError extends Error {
  readonly code: SimulationErrorCode;
  /** Simulation time of the failure, seconds (NaN when not tied to a time). */
  readonly timeS: number;
  /** Ids of the elements involved. */
  readonly elements: readonly string[];
  constructor(code: SimulationErrorCode, message: string, elements: readonly string[], timeS = Number.NaN) {
    super(message);
    this.name = 'SimulationError';
    this.code = code;
    this.elements = elements;
    this.timeS = timeS;
  }
}
