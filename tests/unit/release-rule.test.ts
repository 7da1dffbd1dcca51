import { describe, expect, it } from 'vitest'
import { releasesAutomatically } from '../../shared/releaseRule'
import { releaseSettingsInput } from '../../shared/schemas/review'

// The automatic-release rule (issue 20): under 'auto', a result is released at once only when
// every QC flag it raised is one the lab accepts; under 'review' nothing is.
describe('releasesAutomatically', () => {
  it.each([
    ['review', [], [], false],
    ['review', ['uncalibrated'], ['uncalibrated'], false],
    ['auto', [], [], true],
    ['auto', ['uncalibrated'], ['uncalibrated'], true],
    ['auto', ['uncalibrated', 'unassigned'], ['unassigned', 'uncalibrated', 'unassigned'], true],
    ['auto', ['uncalibrated'], ['uncalibrated', 'low-signal'], false],
    ['auto', [], ['no-peaks'], false],
  ] as const)('policy %s allowing %j with flags %j releases: %s', (policy, allows, flags, expected) => {
    expect(releasesAutomatically(policy, allows, flags)).toBe(expected)
  })
})

describe('release settings', () => {
  it('names the field of a bad QC code and drops repeated ones', () => {
    const bad = releaseSettingsInput.safeParse({ releasePolicy: 'auto', autoReleaseAllows: ['uncalibrated', 'Not A Code'], fourEyes: false })
    expect(bad.success).toBe(false)
    expect(bad.error!.issues[0]!.path).toEqual(['autoReleaseAllows', 1])
    expect(releaseSettingsInput.parse({ releasePolicy: 'auto', autoReleaseAllows: ['uncalibrated', 'uncalibrated'], fourEyes: true }).autoReleaseAllows).toEqual(['uncalibrated'])
  })
})
