//! `plan`: see DESIGN.md module map (filled by its issue).
