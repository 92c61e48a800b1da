# The reference worksheet cell in Python with pint: a 5 V linear regulator from a 10.8–13.2 V
# adapter at 180 mA ± 20 %, its junction temperature over a θ chain at 50 °C ambient with the
# worst case over the input corners, and an LED resistor picked from E24.
_t0 = time.perf_counter()

vin_lo, vin_hi = Q_(10.8, "V"), Q_(13.2, "V")
vin = (vin_lo + vin_hi) / 2
iload = Q_(180, "mA")
iload_lo, iload_hi = iload * 0.8, iload * 1.2
ta = Q_(50, "degC")
vout, iq, dropout = Q_(5, "V"), Q_(4, "mA"), Q_(2, "V")


def linear(vin, iout):
    """Loss and headroom of a linear regulator (the output sags in dropout)."""
    vo = min(vout, vin - dropout)
    loss = (vin - vo) * iout + vin * iq
    return loss.to("W"), (vin - vout - dropout).to("V")


def parallel(a, b):
    return 1 / (1 / a + 1 / b)


def junction(loss):
    return (ta.to("K") + (loss * theta).to("K")).to("degC")


theta = Q_(6, "K/W") + Q_(0.4, "K/W") + parallel(Q_(22, "K/W"), Q_(60, "K/W"))
corners = [linear(v, i) for v in (vin_lo, vin_hi) for i in (iload_lo, iload_hi)]
loss, headroom = linear(vin, iload)
loss_lo = min(c[0] for c in corners)
loss_hi = max(c[0] for c in corners)
headroom_lo = min(c[1] for c in corners)
tj, tj_lo, tj_hi = junction(loss), junction(loss_lo), junction(loss_hi)
tj_ok = tj_hi <= Q_(125, "degC")

# LED resistor: the smallest E24 value at or above (supply − vf) / current, ± 5 %, and the
# smallest common rating at or above twice its worst-case power.
E24 = [1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
       3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1]
across = Q_(5, "V") - Q_(2.1, "V")
need = (across / Q_(8, "mA")).to("ohm")
decade = 10 ** math.floor(math.log10(need.magnitude))
r7 = Q_(next(v * decade for v in E24 + [10.0] if v * decade >= need.magnitude * (1 - 1e-9)), "ohm")
r7_lo, r7_hi = r7 * 0.95, r7 * 1.05
i7, i7_lo, i7_hi = (across / r7).to("mA"), (across / r7_hi).to("mA"), (across / r7_lo).to("mA")
p7_hi = (across**2 / r7_lo).to("W")
rating = Q_(next(w for w in (0.063, 0.1, 0.125, 0.25, 0.5, 1, 2, 3, 5) if w >= 2 * p7_hi.magnitude), "W")

_compute_s = time.perf_counter() - _t0
print(f"u1.loss  {loss.to('mW'):.4g~P}  ({loss_lo.to('mW'):.4g~P} … {loss_hi.to('mW'):.4g~P})")
print(f"headroom {headroom:.3~P}  (min {headroom_lo:.3~P})")
print(f"θ        {theta:.3~P}")
print(f"tj       {tj:.3~P}  ({tj_lo:.3~P} … {tj_hi:.3~P})  check tj <= 125 °C: {'ok' if tj_ok else 'FAILED'}")
print(f"R7       {r7:.3~P}  I {i7:.3~P} ({i7_lo:.3~P} … {i7_hi:.3~P})  rating {rating:~P}")
print(f"bench-compute-seconds {_compute_s!r}")
