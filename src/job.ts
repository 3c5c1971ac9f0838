// The whole job as library calls: read → clean → fit → evaluate → write. The CLI verbs and the
// demo are thin layers over these functions, which live in src/job/ by step.
export * from "./job/points.ts";
export * from "./job/estimates.ts";
export * from "./job/run.ts";
