// Public surface of the model core: re-exports only.
export * from "./types";
export * from "./linalg";
export * from "./distributions";
export * from "./features";
export * from "./moments";
export * from "./estimators";
export * from "./mcd";
export * from "./random";
export * from "./diagnostics";
export * from "./artifact";
export * from "./score";
export * from "./reasons";
export * from "./cutoff";
export * from "./fit";
export * from "./tuning";
export * from "./estimates";
export * from "./drift";
