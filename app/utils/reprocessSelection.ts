/** A reprocessing job's selection in words: the time range, sequence and method version it was limited to. */
export function describeSelection(selection: Record<string, unknown>): string {
  const parts: string[] = []
  const at = (v: unknown) => new Date(String(v)).toLocaleString()
  if (selection.from && selection.to) parts.push(`acquired ${at(selection.from)} – ${at(selection.to)}`)
  else if (selection.from) parts.push(`acquired since ${at(selection.from)}`)
  else if (selection.to) parts.push(`acquired until ${at(selection.to)}`)
  if (selection.sequenceId) parts.push('one sequence')
  if (selection.methodVersion) parts.push(`method v${String(selection.methodVersion)}`)
  return parts.length ? parts.join(', ') : 'every acquisition'
}
