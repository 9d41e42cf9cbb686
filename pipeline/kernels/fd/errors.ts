/**
 * The solver's own refusal: a setting or input that cannot be modelled (unphysical cells, an
 * unstable time step, a too coarse grid, a source outside the model), with the name of the value
 * to change. Steps turn it into their input error; the message is written for the person who set
 * the value.
 */
export class FdSetupError extends Error {
  constructor(
    message: string,
    /** Setting or input field the problem is about, when there is one. */
    readonly field?: string,
  ) {
    super(message);
    this.name = "FdSetupError";
  }
}
