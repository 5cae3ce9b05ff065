//! The generated 3 × 4 design shared by the `analyze` benches (fixed pseudo-random
//! values; nothing read from disk).

/// A 3×4 design with N rows in CSV form (fixed pseudo-random values, 2 decimals).
pub fn make_csv(n: usize) -> Vec<u8> {
    let mut s = String::with_capacity(n * 24);
    s.push_str("id,dose,site,response\n");
    let mut x: u64 = 0x2545F4914F6CDD1D;
    for i in 0..n {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        let dose = ["low", "mid", "high"][i % 3];
        let site = ["north", "south", "east", "west"][(i / 3) % 4];
        let v = 50.0 + (x % 10_000) as f64 / 100.0;
        s.push_str(&format!("{i},{dose},{site},{v:.2}\n"));
    }
    s.into_bytes()
}
