//! placeholder
pub mod kozeny;
