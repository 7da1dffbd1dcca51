// The console's views of the isotope workflow (issue 19): sequences laid out for review,
// control charts with names a person reads, and what needs a lab manager's eye. They read
// what the sequences service stored and call its chart functions; nothing is recomputed here.
export { getSequenceView, listSequenceViews } from './sequences'
export { getControlChartView, isotopeAttentionFor, listControlChartViews } from './charts'
