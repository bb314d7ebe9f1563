// Records → features: the spec, payment records, account history and the derivations.
export * from "./time";
export * from "./local-hour";
export * from "./spec";
export * from "./record";
export * from "./history";
export * from "./derive";
export * from "./artifact-spec";
