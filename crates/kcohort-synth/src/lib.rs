//! kcohort-synth (being written).
