//! (placeholder: being written)
