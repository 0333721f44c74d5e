//! `sim`: planar N-link arm simulator.
