//! startmargin-sdk (under construction)
