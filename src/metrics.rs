//! Pattern figures: peak, beamwidths, nulls, sidelobes, front-to-back.
