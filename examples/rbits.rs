fn main() {
    let a: Vec<u64> = std::env::args()
        .skip(1)
        .map(|x| x.parse().unwrap_or(0))
        .collect();
    println!("{}", ooksift::rng::Rng::new(a[0]).bits(a[1] as usize));
}
