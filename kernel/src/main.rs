fn main() {
    println!("headroom");
}
