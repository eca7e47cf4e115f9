pub fn placeholder() {}
pub mod front;
