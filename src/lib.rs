//! fluxstep
