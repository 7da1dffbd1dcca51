// The linear and power laws, and a source whose fractionation drifts within the sequence, on argon
// sequences simulated from first principles (simulateNobleGas.ts, whose law formulas are typed on
// the measured side, I_meas,i = I_i/(1 + β·Δm_i) and I_i·(1 + β)^(−Δm_i), apart from the engine's
// massBias.ts; Russell, Papanastassiou & Tombrello, Geochim. Cosmochim. Acta 42 (1978) 1075).
// Criteria as in noble-gas-statistics.test.ts (noble-gas-stats-helpers.ts): |mean error| <
// 3·sd/√N, mean z² within its χ²/t² limits, ±2u and k·u coverage within their binomial bands.
// Per-u fractionation 0.4–1.2 % (about the exponential law's β 0.15–0.45 at argon's masses).
import { describe, it } from 'vitest'
import type { MassBiasLaw } from '../../shared/engine/isotopes/massBias'
import { expectCalibrated, runSequences, SEQ_BAND, Z2 } from './noble-gas-stats-helpers'

describe('linear and power laws on data that follow them (300 sequences each)', () => {
  it.each([
    ['linear', 'standard', ['40Ar/36Ar', '38Ar/36Ar']],
    ['linear', 'internal', ['40Ar/36Ar']],
    ['power', 'standard', ['40Ar/36Ar', '38Ar/36Ar']],
    ['power', 'internal', ['40Ar/36Ar']],
  ] as [MassBiasLaw, 'standard' | 'internal', string[]][])('%s law against %s: calibrated', (law, against, quantities) => {
    const result = runSequences(against, law, { beta: [0.004, 0.012] })
    console.info(`${law} law against ${against}:`, JSON.stringify(result), 'band', SEQ_BAND, 'z²', Z2)
    for (const q of quantities) expectCalibrated(result[q]!)
  })
})

describe('fractionation drifting within the sequence, corrected by bracketing standards (300 sequences each)', () => {
  // β moves by 0.1 per 30 min between the standard, the sample and the next standard: the nearest
  // standard alone would leave the sample's 40/36 off by about 1 % (≈ 9 u); ln x interpolated linearly
  // in time between the two standards follows a β linear in time exactly for the exponential law, and
  // to within 10⁻⁵ for the power law at these parameters.
  it.each([
    ['exponential', [0.3, 0.5], 0.2],
    ['power', [0.006, 0.010], 0.004],
  ] as [MassBiasLaw, [number, number], number][])('%s law, parameter drifting: calibrated', (law, beta, drift) => {
    const result = runSequences('standard', law, { beta, betaDriftPerHour: drift })
    console.info(`${law} law drifting ${drift}/h:`, JSON.stringify(result))
    for (const q of ['40Ar/36Ar', '38Ar/36Ar']) expectCalibrated(result[q]!)
  })
})
