// The caution every summary, report and README carries (common practice for survey deliverables).
export const CAUTION =
  "CAUTION: this surface is a statistical estimate from the points given. It does not replace a " +
  "survey by a licensed surveyor or professional judgement, and local codes and standards govern " +
  "any design or construction use.";
