"""Light transport: cameras, materials (BSDFs), lights, environment and the path-tracing integrator."""
