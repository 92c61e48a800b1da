use worksheet_lang::{Interrupt, Worksheet};
#[test]
fn scratch() {
    let mut ws = Worksheet::new();
    let src = "given vin = 10.8 V .. 13.2 V\ngiven i = 180 mA ± 20 %\np = (vin - 5 V) * i\nx = vin - vin\ncheck p <= 2 W \"limit\"\nq = vin / vin\nt = 25 °C + 10 K\nd = 50 °C - 20 °C\ne = 77 °F\nth = 6 K/W + 0.4 K/W + (22 K/W || 60 K/W)\np as mW\n";
    let ex = ws.execute(None, src, &Interrupt::new());
    for d in &ex.report.diagnostics { println!("{}", worksheet_lang::diagnostic::render(src, d)); }
    for v in &ex.report.values { println!("{} = {} {:?}", v.name, v.text, v.range_text); }
    for c in &ex.report.checks { println!("{} {} worst {} limit {} margin {}", c.text, c.passed, c.worst_text, c.limit_text, c.margin_text); }
    for v in &ex.report.shown { println!("show {} = {} {:?}", v.name, v.text, v.range_text); }
}
