//! startmargin-e2e (under construction)
