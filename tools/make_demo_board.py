"""Writes demo_boards/harbor_lidar/traces.csv and traces.xlsx (deterministic).

The board is invented: the controller of a harbour mooring-line lidar ("Harbor
Lidar HL-8"), eight layers. Run from the repository root: python tools/make_demo_board.py
"""

from __future__ import annotations

import csv
import random
from pathlib import Path

from openpyxl import Workbook

OUT = Path(__file__).resolve().parent.parent / "demo_boards" / "harbor_lidar"
HEADER = ["Net", "Layer", "Length [mm]", "Width [mm]", "Rise Time", "Pair", "Gap [mm]", "Net Class",
          "Driver Ohm", "Load pF", "From", "To", "Driver", "Continues", "Part"]


def rows() -> list[list]:
    rnd = random.Random(8)
    out: list[list] = []

    def seg(net, layer, length, width="", rise="", pair="", gap="", cls="", drv="", load=""):
        out.append([net, layer, round(length, 2), width, rise, pair, gap, cls, drv, load])

    # Slow control: short, lumped at their 5 ns edges.
    for i in range(16):
        seg(f"GPIO{i}", rnd.choice(["TOP", "BOT"]), rnd.uniform(8, 60))
    for n in ("I2C_SCL", "I2C_SDA"):
        seg(n, "TOP", rnd.uniform(40, 90))
    for n in ("RESET_N", "PGOOD", "FAN_PWM", "TEMP_ALERT_N", "LED0", "LED1", "LED2", "LED3"):
        seg(n, rnd.choice(["TOP", "BOT"]), rnd.uniform(10, 120))
    # A long slow net that still stays lumped: 5 ns edge.
    seg("BUZZER", "BOT", 150.0)

    # SPI to the flash and the laser driver: 1.5 ns edges, some long enough to matter.
    for n, ln in (("SPI_SCK", 95.0), ("SPI_MOSI", 92.0), ("SPI_MISO", 40.0), ("SPI_CS_N", 25.0)):
        seg(n, "TOP", ln * 0.3, drv=25 if n == "SPI_SCK" else "")
        seg(n, "IN3", ln * 0.7)

    # Clocks: 50 ohm, 400 ps edges; the FPGA clock changes layer twice.
    seg("CLK_25M_ETH", "TOP", 18.0, drv=17)
    seg("CLK_50M_SYS", "TOP", 12.0, drv=17)
    seg("CLK_50M_SYS", "IN6", 70.0)
    seg("CLK_50M_SYS", "TOP", 6.0)
    seg("CLK_100M_FPGA", "IN3", 48.0, drv=12)
    seg("CLK_ADC", "BOT", 4.0, drv=20)
    seg("CLK_ADC", "IN6", 62.0)
    seg("CLK_TDC", "IN6", 35.0, width=0.25, drv=20)        # too wide: misses its 50 ohm target
    seg("CLK_PLL_REF", "TOP", 7.5, drv=30)

    # Parallel SRAM bus: 1 ns edges, routed TOP -> IN3 -> TOP.
    for i in range(16):
        a, b, c = rnd.uniform(3, 8), rnd.uniform(30, 70), rnd.uniform(2, 6)
        seg(f"SRAM_D{i}", "TOP", a)
        seg(f"SRAM_D{i}", "IN3", b)
        seg(f"SRAM_D{i}", "TOP", c)
    for i in range(12):
        seg(f"SRAM_A{i}", "TOP", rnd.uniform(4, 9))
        seg(f"SRAM_A{i}", "IN4", rnd.uniform(40, 85))
    for n in ("SRAM_WE_N", "SRAM_OE_N", "SRAM_CE_N", "SRAM_BLE_N"):
        seg(n, "TOP", rnd.uniform(15, 30))
        seg(n, "IN4", rnd.uniform(20, 40), width=0.09)      # narrow neck on IN4: high Z

    # Differential pairs. LVDS receivers from the lidar head: 100 ohm, 250 ps edges.
    for k in range(4):
        p, n = f"LIDAR_RX{k}_P", f"LIDAR_RX{k}_N"
        seg(p, "TOP", 6.0, pair=n)
        seg(p, "IN6", rnd.uniform(90, 140), pair=n)
        if k % 2 == 0:      # two of the pairs list the N leg too
            seg(n, "TOP", 6.1, pair=p)
            seg(n, "IN6", out[-2][2] + 0.3, pair=p)
    # Ethernet and USB.
    seg("ETH_TX_P", "TOP", 32.0, pair="ETH_TX_N")
    seg("ETH_RX_P", "TOP", 30.0, pair="ETH_RX_N")
    seg("USB_D_P", "TOP", 41.0, pair="USB_D_N")
    seg("USB_D_P", "IN3", 25.0, pair="USB_D_N", gap=0.1)     # tight gap on the offset layer
    seg("LASER_TRIG_P", "IN6", 210.0, pair="LASER_TRIG_N", cls="LVDS")

    # ---- vias and return paths (issue 9) ----
    # A 28 Gb/s optical uplink that dives from TOP to IN3 through through-vias: the barrel below IN3 is a
    # long stub (via-stub). Widths from `sicheck plan --zdiff 100 --gap-rule fixed:0.15mm`.
    seg("UPLINK_TX_P", "TOP", 5.0, width=0.089, pair="UPLINK_TX_N")
    seg("UPLINK_TX_P", "IN3", 48.0, width=0.116, pair="UPLINK_TX_N")
    seg("UPLINK_TX_P", "TOP", 4.0, width=0.089, pair="UPLINK_TX_N")
    # An SPI clock that changes from TOP (over GND) to BOT (over the +3V3 plane): return-path warning.
    seg("SPI_DAC_SCK", "TOP", 22.0)
    seg("SPI_DAC_SCK", "BOT", 38.0)
    # ---- end vias and return paths ----

    # ---- multi-drop bus with branches (issue 11: from/to/driver) ----
    # The FPGA (U1) writes the configuration of the two laser drivers (U7, U8) over a shared bus: a via
    # (V) to a trunk on IN3, a T, a branch to each driver, and a test pad (TP) on TOP at the via. Rows are
    # listed as exported (not in route order): from/to give the shape, the driver column names U1's pin.
    # CFG0 branches early (long branches, a long pad stub); CFG1-3 branch next to the drivers.
    for k, (trunk, b7, b8, pad) in enumerate(((40.0, 27.0, 33.0, 14.0), (66.0, 6.0, 9.0, 2.0),
                                             (65.0, 7.0, 8.5, 2.5), (67.0, 5.5, 9.5, 2.0))):
        net, pin = f"LDRV_CFG{k}", 20 + k
        for layer, ln, frm, to, drv, load in (
                ("IN3", b7, f"T{k}", f"U7.{pin}", "", 4),
                ("TOP", 6.0, f"U1.{pin}", f"V{k}", f"U1.{pin}", ""),
                ("IN3", trunk, f"V{k}", f"T{k}", "", ""),
                ("TOP", pad, f"V{k}", f"TP{k + 30}", "", ""),
                ("IN3", b8, f"T{k}", f"U8.{pin}", "", 4)):
            out.append([net, layer, ln, 0.15, "600ps", "", "", "", 20, load, frm, to, drv])
    # ---- end multi-drop bus ----

    # ---- timing block (match group, skewed pair; keep it a block of its own at the end) ----
    # TDC capture bus: four data bits matched to their strobe (rules: [[match_group]] "TDC bus", 10 ps).
    # TDC_D1 has the strobe's length but runs 20 mm of it on TOP (microstrip, faster): lengths match, delays
    # do not. TDC_D3 detours 7 mm around a mounting hole: outside the group and over the class's delay budget.
    seg("TDC_STB", "TOP", 4.0, drv=20)
    seg("TDC_STB", "IN3", 52.0)
    for i, (top, inner) in enumerate(((4.0, 52.3), (24.0, 32.0), (4.0, 51.8), (4.0, 59.0))):
        seg(f"TDC_D{i}", "TOP", top)
        seg(f"TDC_D{i}", "IN3", inner)
    # Frame-sync pair from the lidar head, both legs listed: the N leg is 2.5 mm longer (a connector pin swap).
    seg("HEAD_SYNC_P", "IN6", 80.0, pair="HEAD_SYNC_N", cls="LVDS")
    seg("HEAD_SYNC_N", "IN6", 82.5, pair="HEAD_SYNC_P", cls="LVDS")
    # ---- end timing block ----

    # ---- parts in series (continues/part: two routed nets reviewed as one) ----
    # Return link to the lidar head, AC-coupled: 70 mm from the FPGA to 100 nF capacitors, then 4.9 mm to the
    # connector. The shutter drive has its 22 ohm source resistor 5 mm from the driver, then 85 mm to the shutter driver.
    for leg, other in (("P", "N"), ("N", "P")):
        out.append([f"HEAD_LINK_{leg}", "IN3", 70.0, "", "", f"HEAD_LINK_{other}", "", "LVDS", "", "", "", "", "",
                    f"HEAD_LINK_{leg}_C", "100nF"])
        out.append([f"HEAD_LINK_{leg}_C", "TOP", 4.9, "", "", f"HEAD_LINK_{other}_C", "", "LVDS", "", 2.0, "", "",
                    "", "", ""])
    out.append(["SHUTTER_DRV_SRC", "TOP", 5.0, 0.15, "500ps", "", "", "", 12, "", "", "", "", "SHUTTER_DRV", "22ohm"])
    out.append(["SHUTTER_DRV", "IN3", 85.0, 0.12, "500ps", "", "", "", "", 3.0, "", "", "", "", ""])
    # ---- end parts in series ----
    return out


def main() -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    data = rows()
    with open(OUT / "traces.csv", "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f)
        w.writerow(HEADER)
        for r in data:
            r = list(r) + [""] * (len(HEADER) - len(r))
            if r[4] == "" and r[0].startswith("CLK_"):
                r[4] = "400ps"
            w.writerow(r)
    wb = Workbook()
    ws = wb.active
    ws.title = "Routed segments"
    ws.append(HEADER)
    for r in csv.reader(open(OUT / "traces.csv", encoding="utf-8")):
        if r[0] == "Net":
            continue
        ws.append([float(x) if i in (2, 3, 6, 8, 9) and x else (x or None) for i, x in enumerate(r)])
    wb.save(OUT / "traces.xlsx")
    print(f"{len(data)} rows, {len({r[0] for r in data})} listed nets")


if __name__ == "__main__":
    main()
