import type uPlot from 'uplot'
import type { ChartColors } from '~/utils/charts'

/** Axis styling shared by the isotope plots (the console's muted axes and grid). */
export function isotopeAxis(label: string, c: ChartColors, extra: Partial<uPlot.Axis> = {}): uPlot.Axis {
  return { label, stroke: c.muted, grid: { stroke: c.line, width: 1 }, ticks: { stroke: c.line }, ...extra }
}

/** A horizontal line across the plot area at y = value, solid or dashed, with a label at its right end. */
export function drawHorizontal(u: uPlot, value: number, colour: string, label: string, dashed = false) {
  const min = u.scales.y!.min!
  const max = u.scales.y!.max!
  if (value < min || value > max) return
  const y = Math.round(u.valToPos(value, 'y', true))
  const ctx = u.ctx
  ctx.save()
  ctx.strokeStyle = colour
  ctx.fillStyle = colour
  ctx.lineWidth = devicePixelRatio
  if (dashed) ctx.setLineDash([5 * devicePixelRatio, 4 * devicePixelRatio])
  ctx.beginPath()
  ctx.moveTo(u.bbox.left, y)
  ctx.lineTo(u.bbox.left + u.bbox.width, y)
  ctx.stroke()
  if (label) {
    ctx.font = `${10 * devicePixelRatio}px Inter, system-ui, sans-serif`
    ctx.textAlign = 'right'
    ctx.fillText(label, u.bbox.left + u.bbox.width - 4 * devicePixelRatio, y - 3 * devicePixelRatio)
  }
  ctx.restore()
}

/** A y range that holds every value given with a margin, never empty. */
export function paddedRange(values: number[], margin = 0.1): [number, number] {
  const finite = values.filter(Number.isFinite)
  if (!finite.length) return [-1, 1]
  const lo = Math.min(...finite)
  const hi = Math.max(...finite)
  const pad = (hi - lo) * margin || Math.max(Math.abs(hi) * 0.05, 0.1)
  return [lo - pad, hi + pad]
}

/** A number as the console prints δ values and residuals: fixed decimals, a real minus sign. */
export function formatPermil(value: number | null | undefined, digits = 2): string {
  if (value == null || !Number.isFinite(value)) return '–'
  return value.toFixed(digits).replace('-', '−')
}
