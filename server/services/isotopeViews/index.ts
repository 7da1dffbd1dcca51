// The console's views of the isotope workflow (issue 19): sequences laid out for review,
// control charts, and what needs a lab manager's eye. Reads what the sequences service stored.
export { getSequenceView, listSequenceViews } from './sequences'
