//! startmargin-demo (under construction)
