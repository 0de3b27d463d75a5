// The flavour of generated C: CUDA or plain C99, float or double. Its own file so that the C
// emitter (emit.ts) and the fused population steps (fused.ts) share it without importing each other.
export interface CFlavour {
  cuda: boolean;
  float: boolean;
}
