//! startmargin-proto (under construction)
