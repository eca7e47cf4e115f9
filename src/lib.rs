pub fn placeholder() {}

pub mod compare;
