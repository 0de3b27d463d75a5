// The text of "Saltus: New model file" (newModel.ts), kept free of `vscode` so that the
// tests can check it has no problems.
export const NEW_MODEL_TEXT = `# A leaky integrate-and-fire neuron with a current synapse: edit it, hover over names,
# and watch the checks as you type. A '#~' note documents the declaration it stands beside
# (or above): hovers and completion show it.
timestep 0.1 [ms]

#~ leaky integrate-and-fire cell with an exponentially decaying synaptic current
neuron Cell {
  param tau_m = 20 [ms] trainable  #~ membrane time constant
  param tau_s = 5 [ms]             #~ synaptic time constant
  param theta = 1                  #~ firing threshold (scaled)
  state V = 0                      #~ membrane potential (scaled)
  state I = 0                      #~ synaptic current (scaled)

  dV/dt = (I - V) / tau_m
  dI/dt = -I / tau_s

  fire when V crosses theta up { V := 0 }
  incoming w { I := I + w }
}
`;
