/**
 * The one error that means "stopped because someone asked": thrown by long computations when their
 * stop check says so (fitting, hindcasts), rethrown by the worker client, and recognised by the job
 * runner, which then marks the job cancelled rather than failed. Recognise it with instanceof.
 */
export class CancelledError extends Error {
  constructor(message = 'cancelled on request') {
    super(message);
    this.name = 'CancelledError';
  }
}
