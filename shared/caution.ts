/**
 * The caution every result view carries (console, reports, API documentation): results are
 * only as good as the geometry, calibration and (for sequences) method a lab registers.
 */
export const CAUTION = 'Arcwise computes results from the geometry, calibration and method each lab registers. Results that feed regulatory, clinical, forensic or safety decisions must be reviewed under the lab\'s own quality system and accreditation.'

/**
 * The caution in one line, for every partner-facing result (webhooks, feed, reads, peaks) and
 * for places with no room for the whole (CSV `#` comments, JCAMP-DX `##$` fields,
 * certificates' headers): the same warning, the full text kept beside it where it fits.
 */
export const CAUTION_SHORT = 'Computed from the lab\'s registered geometry, calibration and method; review under your own quality system before regulatory, clinical, forensic or safety use.'
