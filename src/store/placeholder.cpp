// Placeholder until this layer has sources of its own; delete when it does.
