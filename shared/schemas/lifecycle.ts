// The result lifecycle's vocabulary (issue 20), one source for the tables, the API and the
// console: review states, release policies and reprocessing job states.

/**
 * held: computed, waiting for the lab's review (partners see nothing);
 * released: authorised by a reviewer or by the lab's automatic rule (partners see it);
 * rejected: a reviewer refused it (never reaches partners; it stays readable in the console);
 * retracted: was released, then withdrawn with a reason (stays readable, marked, to partners too).
 */
export const reviewStates = ['held', 'released', 'rejected', 'retracted'] as const
export type ReviewState = (typeof reviewStates)[number]

/** review: every result waits for a person; auto: released at once when no blocking QC flag is raised. */
export const releasePolicies = ['review', 'auto'] as const
export type ReleasePolicy = (typeof releasePolicies)[number]

export const reprocessJobStates = ['queued', 'running', 'done', 'failed', 'cancelled'] as const
export type ReprocessJobState = (typeof reprocessJobStates)[number]

export const reprocessItemStates = ['pending', 'done', 'failed'] as const
export type ReprocessItemState = (typeof reprocessItemStates)[number]

export const certificateSubjects = ['result', 'sequence'] as const
export type CertificateSubject = (typeof certificateSubjects)[number]
