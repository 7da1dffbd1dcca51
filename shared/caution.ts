/**
 * The caution every result view carries (console, reports, API documentation): results are
 * only as good as the geometry, calibration and (for sequences) method a lab registers.
 */
export const CAUTION = 'Arcwise computes results from the geometry, calibration and method each lab registers. Results that feed regulatory, clinical, forensic or safety decisions must be reviewed under the lab\'s own quality system and accreditation.'
