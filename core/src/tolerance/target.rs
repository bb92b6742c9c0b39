//! Synthesis for a yield target: placeholder, filled in below.
