//! The demo models of models-demo/ (filled in when they are trained).
