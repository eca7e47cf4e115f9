pub fn placeholder() {}
pub mod budget;
