//! The stage schematic as SVG text: IEC-style symbols (rectangular resistors), reference
//! designators and values beside each part, net labels for the trigger network.

use std::fmt::Write;

use flipwright::device::Polarity;
use flipwright::stage::{BiasScheme, StageDesign, Steering};
use flipwright::units::{format_quantity, Unit};

struct Svg {
    body: String,
}

impl Svg {
    fn line(&mut self, x1: f64, y1: f64, x2: f64, y2: f64) {
        let _ = writeln!(self.body, r#"<line x1="{x1:.1}" y1="{y1:.1}" x2="{x2:.1}" y2="{y2:.1}"/>"#);
    }
    fn polyline(&mut self, points: &[(f64, f64)]) {
        let list: Vec<String> = points.iter().map(|(x, y)| format!("{x:.1},{y:.1}")).collect();
        let _ = writeln!(self.body, r#"<polyline fill="none" points="{}"/>"#, list.join(" "));
    }
    fn dot(&mut self, x: f64, y: f64) {
        let _ = writeln!(self.body, r#"<circle class="dot" cx="{x:.1}" cy="{y:.1}" r="2.6"/>"#);
    }
    fn text(&mut self, x: f64, y: f64, anchor: &str, class: &str, text: &str) {
        let escaped = text.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;");
        let _ = writeln!(
            self.body,
            r#"<text x="{x:.1}" y="{y:.1}" text-anchor="{anchor}" class="{class}">{escaped}</text>"#
        );
    }
    /// Two-line part label: designator, then value.
    fn label(&mut self, x: f64, y: f64, anchor: &str, designator: &str, value: &str) {
        self.text(x, y, anchor, "ref", designator);
        self.text(x, y + 12.0, anchor, "val", value);
    }
    /// Resistor between two points, body (IEC rectangle) in the middle.
    fn resistor(&mut self, a: (f64, f64), b: (f64, f64)) {
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let length = (dx * dx + dy * dy).sqrt().max(1.0);
        let angle = dy.atan2(dx).to_degrees();
        let body = 34.0f64.min(length * 0.6);
        let _ = writeln!(
            self.body,
            r#"<g transform="translate({:.1},{:.1}) rotate({angle:.2})"><line x1="0" y1="0" x2="{:.1}" y2="0"/><rect x="{:.1}" y="-6" width="{body:.1}" height="12" fill="white"/><line x1="{:.1}" y1="0" x2="{length:.1}" y2="0"/></g>"#,
            a.0,
            a.1,
            (length - body) / 2.0,
            (length - body) / 2.0,
            (length + body) / 2.0
        );
    }
    /// Capacitor between two points, plates in the middle.
    fn capacitor(&mut self, a: (f64, f64), b: (f64, f64)) {
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let length = (dx * dx + dy * dy).sqrt().max(1.0);
        let angle = dy.atan2(dx).to_degrees();
        let m = length / 2.0;
        let _ = writeln!(
            self.body,
            r#"<g transform="translate({:.1},{:.1}) rotate({angle:.2})"><line x1="0" y1="0" x2="{:.1}" y2="0"/><line class="plate" x1="{:.1}" y1="-10" x2="{:.1}" y2="10"/><line class="plate" x1="{:.1}" y1="-10" x2="{:.1}" y2="10"/><line x1="{:.1}" y1="0" x2="{length:.1}" y2="0"/></g>"#,
            a.0,
            a.1,
            m - 4.0,
            m - 4.0,
            m - 4.0,
            m + 4.0,
            m + 4.0,
            m + 4.0
        );
    }
    /// Resistor with a capacitor in parallel on an offset path, both in the first half of the
    /// line from `a` to `b` (so two crossing pairs do not collide); `offset` sets the side.
    fn resistor_with_capacitor(&mut self, a: (f64, f64), b: (f64, f64), offset: f64, with_capacitor: bool) {
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let length = (dx * dx + dy * dy).sqrt().max(1.0);
        let angle = dy.atan2(dx).to_degrees();
        let (join_a, join_b) = (0.08 * length, 0.46 * length);
        let body = 34.0;
        let centre = 0.27 * length;
        let mut g = format!(r#"<g transform="translate({:.1},{:.1}) rotate({angle:.2})">"#, a.0, a.1);
        let _ = write!(
            g,
            r#"<line x1="0" y1="0" x2="{:.1}" y2="0"/><rect x="{:.1}" y="-6" width="{body:.1}" height="12"/><line x1="{:.1}" y1="0" x2="{length:.1}" y2="0"/>"#,
            centre - body / 2.0,
            centre - body / 2.0,
            centre + body / 2.0
        );
        if with_capacitor {
            let _ = write!(
                g,
                r#"<polyline fill="none" points="{join_a:.1},0 {join_a:.1},{offset:.1} {:.1},{offset:.1}"/><line class="plate" x1="{:.1}" y1="{:.1}" x2="{:.1}" y2="{:.1}"/><line class="plate" x1="{:.1}" y1="{:.1}" x2="{:.1}" y2="{:.1}"/><polyline fill="none" points="{:.1},{offset:.1} {join_b:.1},{offset:.1} {join_b:.1},0"/><circle class="dot" cx="{join_a:.1}" cy="0" r="2.6"/><circle class="dot" cx="{join_b:.1}" cy="0" r="2.6"/>"#,
                centre - 4.0,
                centre - 4.0,
                offset - 9.0,
                centre - 4.0,
                offset + 9.0,
                centre + 4.0,
                offset - 9.0,
                centre + 4.0,
                offset + 9.0,
                centre + 4.0
            );
        }
        g.push_str("</g>");
        let _ = writeln!(self.body, "{g}");
    }
    /// Diode from anode `a` to cathode `b`.
    fn diode(&mut self, a: (f64, f64), b: (f64, f64)) {
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let length = (dx * dx + dy * dy).sqrt().max(1.0);
        let angle = dy.atan2(dx).to_degrees();
        let m = length / 2.0;
        let _ = writeln!(
            self.body,
            r#"<g transform="translate({:.1},{:.1}) rotate({angle:.2})"><line x1="0" y1="0" x2="{:.1}" y2="0"/><polygon class="solid" points="{:.1},-8 {:.1},8 {:.1},0"/><line class="plate" x1="{:.1}" y1="-8" x2="{:.1}" y2="8"/><line x1="{:.1}" y1="0" x2="{length:.1}" y2="0"/></g>"#,
            a.0,
            a.1,
            m - 7.0,
            m - 7.0,
            m - 7.0,
            m + 7.0,
            m + 7.0,
            m + 7.0,
            m + 7.0
        );
    }
    /// A diode whose anode-to-cathode direction is given in the NPN frame. A PNP stage is the
    /// NPN stage with every current reversed, so each of its diodes is drawn turned round.
    fn polar_diode(&mut self, npn_anode: (f64, f64), npn_cathode: (f64, f64), polarity: Polarity) {
        match polarity {
            Polarity::Npn => self.diode(npn_anode, npn_cathode),
            Polarity::Pnp => self.diode(npn_cathode, npn_anode),
        }
    }
    /// Transistor with its base bar at `bar_x`; `facing` +1 when the base lead goes right.
    /// Returns (collector, emitter) lead ends.
    fn transistor(
        &mut self,
        bar_x: f64,
        y: f64,
        facing: f64,
        polarity: Polarity,
    ) -> ((f64, f64), (f64, f64)) {
        let outer = bar_x - facing * 40.0;
        let _ = writeln!(
            self.body,
            r#"<circle class="body" cx="{:.1}" cy="{y:.1}" r="24"/>"#,
            bar_x - facing * 14.0
        );
        let _ = writeln!(
            self.body,
            r#"<line class="bar" x1="{bar_x:.1}" y1="{:.1}" x2="{bar_x:.1}" y2="{:.1}"/>"#,
            y - 14.0,
            y + 14.0
        );
        let collector = (outer, y - 30.0);
        let emitter = (outer, y + 30.0);
        self.polyline(&[(bar_x, y - 7.0), (outer, y - 22.0), collector]);
        self.polyline(&[(bar_x, y + 7.0), (outer, y + 22.0), emitter]);
        // Arrow on the emitter: outward for NPN, inward for PNP.
        let (from, to) = match polarity {
            Polarity::Npn => ((bar_x, y + 7.0), (outer, y + 22.0)),
            Polarity::Pnp => ((outer, y + 22.0), (bar_x, y + 7.0)),
        };
        let (dx, dy) = (to.0 - from.0, to.1 - from.1);
        let length = (dx * dx + dy * dy).sqrt().max(1.0);
        let (ux, uy) = (dx / length, dy / length);
        let tip = (from.0 + ux * length * 0.75, from.1 + uy * length * 0.75);
        let back = (tip.0 - ux * 8.0, tip.1 - uy * 8.0);
        let _ = writeln!(
            self.body,
            r#"<polygon class="solid" points="{:.1},{:.1} {:.1},{:.1} {:.1},{:.1}"/>"#,
            tip.0,
            tip.1,
            back.0 - uy * 4.0,
            back.1 + ux * 4.0,
            back.0 + uy * 4.0,
            back.1 - ux * 4.0
        );
        (collector, emitter)
    }
    fn net_label(&mut self, x: f64, y: f64, anchor: &str, name: &str) {
        self.text(x, y + 4.0, anchor, "net", name);
    }
}

fn ohms(value: f64) -> String {
    format_quantity(value, Unit::Ohm)
}

fn farads(value: f64) -> String {
    format_quantity(value, Unit::Farad)
}

/// The schematic of one stage (stage 1 designators, as in the component table).
pub fn stage_svg(design: &StageDesign) -> String {
    let values = design.values();
    let input = design.input();
    let polarity = design.transistor().polarity;
    let sign = polarity.sign();
    let mut s = Svg { body: String::new() };
    let (x1, x2) = (150.0, 490.0);
    let (top, collector_y, base_y, emitter_y, bottom) = (40.0, 150.0, 260.0, 330.0, 390.0);
    let (b1x, b2x) = (240.0, 400.0);
    // Rails.
    s.line(90.0, top, 550.0, top);
    s.text(560.0, top + 4.0, "start", "rail", &format!("{:+} V", sign * input.supplies.collector_supply_v));
    // Collector resistors.
    for (x, name) in [(x1, "R101"), (x2, "R102")] {
        s.dot(x, top);
        s.resistor((x, top), (x, collector_y));
        s.label(
            if x < 320.0 { x - 12.0 } else { x + 12.0 },
            90.0,
            if x < 320.0 { "end" } else { "start" },
            name,
            &ohms(values.collector_resistor_ohm),
        );
        s.dot(x, collector_y);
    }
    s.net_label(x1 - 8.0, collector_y, "end", "C1");
    s.net_label(x2 + 8.0, collector_y, "start", "C2");
    // Transistors, bases facing inward.
    let (c1, e1) = s.transistor(b1x - 50.0, base_y, 1.0, polarity);
    let (c2, e2) = s.transistor(b2x + 50.0, base_y, -1.0, polarity);
    s.line(c1.0, c1.1, x1, collector_y);
    s.line(c2.0, c2.1, x2, collector_y);
    s.line(b1x - 50.0, base_y, b1x, base_y);
    s.line(b2x + 50.0, base_y, b2x, base_y);
    s.dot(b1x, base_y);
    s.dot(b2x, base_y);
    s.net_label(b1x - 4.0, base_y - 8.0, "end", "B1");
    s.net_label(b2x + 4.0, base_y - 8.0, "start", "B2");
    s.label(x1 - 30.0, base_y + 4.0, "end", "Q101", polarity.name());
    s.label(x2 + 30.0, base_y + 4.0, "start", "Q102", polarity.name());
    // Cross-coupling R1 with C1 in parallel, on the diagonals from each collector to the
    // other base; each pair sits in the half of its diagonal nearer the collector.
    let with_capacitor = values.commutating_capacitor_f > 0.0;
    for (from, to, r_name, c_name, side) in [
        ((x1, collector_y), (b2x, base_y - 30.0), "R103", "C101", 1.0),
        ((x2, collector_y), (b1x, base_y - 30.0), "R104", "C102", -1.0),
    ] {
        s.resistor_with_capacitor(from, to, -side * 22.0, with_capacitor);
        s.line(to.0, to.1, to.0, base_y);
        s.dot(to.0, to.1);
        let (dx, dy) = (to.0 - from.0, to.1 - from.1);
        let at = |f: f64| (from.0 + f * dx, from.1 + f * dy);
        let r_at = at(0.27);
        s.label(
            r_at.0 - side * 6.0,
            r_at.1 + 22.0,
            if side > 0.0 { "end" } else { "start" },
            r_name,
            &ohms(values.cross_resistor_ohm),
        );
        if with_capacitor {
            // Centred over C1's plates, which sit 22 off the diagonal on the collector-rail
            // side (see `resistor_with_capacitor`): value baseline 16 above the plates' centre.
            let length = (dx * dx + dy * dy).sqrt().max(1.0);
            let offset = -side * 22.0;
            let plates = (r_at.0 - offset * dy / length, r_at.1 + offset * dx / length);
            s.label(plates.0, plates.1 - 28.0, "middle", c_name, &farads(values.commutating_capacitor_f));
        }
    }
    // Base resistors to the bias return.
    let bias_label = match values.bias {
        BiasScheme::Fixed => format!("{:+} V", -sign * input.supplies.bias_supply_v),
        BiasScheme::SelfBias => "0 V".to_string(),
    };
    for (x, name, anchor, dx) in [(b1x, "R105", "start", 10.0), (b2x, "R106", "end", -10.0)] {
        s.resistor((x, base_y), (x, bottom));
        s.label(x + dx, 350.0, anchor, name, &ohms(values.base_resistor_ohm));
        s.dot(x, bottom);
    }
    s.line(90.0, bottom, 550.0, bottom);
    s.text(560.0, bottom + 4.0, "start", "rail", &bias_label);
    // Emitters.
    match values.bias {
        BiasScheme::Fixed => {
            s.polyline(&[e1, (e1.0, emitter_y)]);
            s.polyline(&[e2, (e2.0, emitter_y)]);
            s.line(e1.0 - 20.0, emitter_y, e2.0 + 20.0, emitter_y);
            s.text(e2.0 + 28.0, emitter_y + 4.0, "start", "rail", "0 V");
        }
        BiasScheme::SelfBias => {
            let node = (320.0, emitter_y);
            s.polyline(&[e1, (e1.0, emitter_y), node]);
            s.polyline(&[e2, (e2.0, emitter_y), node]);
            s.dot(node.0, node.1);
            s.resistor((300.0, emitter_y), (300.0, bottom));
            s.line(300.0, emitter_y, 340.0, emitter_y);
            s.capacitor((340.0, emitter_y), (340.0, bottom));
            s.label(292.0, 362.0, "end", "R107", &ohms(values.emitter_resistor_ohm));
            s.label(350.0, 362.0, "start", "C105", &farads(values.emitter_bypass_capacitor_f));
            s.net_label(326.0, emitter_y - 8.0, "start", "E");
        }
    }
    // Trigger network below, joined by net labels.
    let mut height = 420.0;
    if let Some(trigger) = values.trigger {
        let y = 482.0;
        height = 552.0;
        s.text(40.0, y - 52.0, "start", "heading", "Trigger network (nets join by name)");
        match trigger.steering {
            Steering::Base => {
                for (index, x0, base_net, collector_net) in [(1, 60.0, "B1", "C1"), (2, 330.0, "B2", "C2")] {
                    s.net_label(x0, y, "end", "IN");
                    s.capacitor((x0 + 4.0, y), (x0 + 70.0, y));
                    // Above the plates (±10): value baseline 18 above the wire.
                    s.label(
                        x0 + 37.0,
                        y - 30.0,
                        "middle",
                        &format!("C10{}", 2 + index),
                        &farads(trigger.trigger_capacitor_f),
                    );
                    let node = (x0 + 70.0, y);
                    s.dot(node.0, node.1);
                    // NPN: anode at the base, cathode at the steering node (PNP reversed).
                    s.polar_diode((x0 + 150.0, y), node, polarity);
                    s.net_label(x0 + 154.0, y, "start", base_net);
                    s.label(x0 + 110.0, y - 30.0, "middle", &format!("D10{index}"), "");
                    s.resistor(node, (node.0, y + 50.0));
                    s.net_label(node.0, y + 62.0, "middle", collector_net);
                    s.label(
                        node.0 + 12.0,
                        y + 24.0,
                        "start",
                        &format!("R10{}", 7 + index),
                        &ohms(trigger.trigger_resistor_ohm),
                    );
                }
            }
            Steering::Collector => {
                let x0 = 140.0;
                s.net_label(x0, y, "end", "IN");
                s.capacitor((x0 + 4.0, y), (x0 + 80.0, y));
                s.label(x0 + 42.0, y - 30.0, "middle", "C103", &farads(trigger.trigger_capacitor_f));
                let node = (x0 + 80.0, y);
                s.dot(node.0, node.1);
                // Rt down to the supply label, clear of the heading above.
                s.resistor(node, (node.0, y + 50.0));
                s.text(
                    node.0,
                    y + 64.0,
                    "middle",
                    "rail",
                    &format!("{:+} V", sign * input.supplies.collector_supply_v),
                );
                s.label(node.0 + 12.0, y + 24.0, "start", "R108", &ohms(trigger.trigger_resistor_ohm));
                // One diode to each collector, each on its own branch from the common node (a
                // single line through both read as the two in series): D101 on the node's
                // row, D102 on a branch 40 above it.
                let branch = (node.0 + 40.0, y);
                s.dot(branch.0, branch.1);
                s.line(branch.0, y, branch.0, y - 40.0);
                for (index, row, net, label_dy) in [(1, y, "C1", 22.0), (2, y - 40.0, "C2", 18.0)] {
                    let (near, far) = (node.0 + 70.0, node.0 + 150.0);
                    s.line(if index == 1 { node.0 } else { branch.0 }, row, near, row);
                    // NPN: anode at the collector, cathode at the common node (PNP reversed).
                    s.polar_diode((far, row), (near, row), polarity);
                    s.net_label(far + 4.0, row, "start", net);
                    s.label(0.5 * (near + far), row + label_dy, "middle", &format!("D10{index}"), "");
                }
            }
        }
    }
    format!(
        r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 640 {height:.0}" class="schematic" role="img" aria-label="Schematic of the bistable stage"><style>.schematic line,.schematic polyline,.schematic rect,.schematic circle.body{{stroke:#222;stroke-width:1.6;fill:none}} .schematic rect{{fill:#fff}} .schematic line.plate{{stroke-width:3}} .schematic line.bar{{stroke-width:4}} .schematic .solid{{fill:#222;stroke:none}} .schematic circle.dot{{fill:#222;stroke:none}} .schematic text{{font-family:sans-serif;font-size:11px;fill:#222}} .schematic text.ref{{font-weight:bold}} .schematic text.val{{fill:#333}} .schematic text.net{{font-style:italic;fill:#0b5394}} .schematic text.rail{{font-weight:bold}} .schematic text.heading{{font-size:12px;font-weight:bold}}</style>{}</svg>"#,
        s.body
    )
}

#[cfg(test)]
mod tests {
    use flipwright::design_file::{DesignFile, DeviceChoice};
    use flipwright::stage::{StageDesign, Steering};

    /// The demo requirements with another transistor and steering, values synthesised.
    fn designed(transistor_id: &str, steering: Steering) -> StageDesign {
        let mut file = DesignFile::demo();
        file.transistor = DeviceChoice::Archetype(transistor_id.to_string());
        file.requirements.steering = steering;
        let input = file.synthesis_input().unwrap_or_else(|e| unreachable!("{e:?}"));
        let outcome =
            flipwright::stage::synthesis::synthesise(&input).unwrap_or_else(|e| unreachable!("{e}"));
        file.values = Some(outcome.values);
        file.stage_input(None).and_then(StageDesign::new).unwrap_or_else(|e| unreachable!("{e:?}"))
    }

    fn numbers(text: &str) -> Vec<f64> {
        text.split(|c: char| !(c.is_ascii_digit() || c == '.' || c == '-'))
            .filter_map(|t| t.parse().ok())
            .collect()
    }

    fn attribute<'a>(element: &'a str, name: &str) -> &'a str {
        let key = format!(r#"{name}=""#);
        element.split(&key).nth(1).and_then(|rest| rest.split('"').next()).unwrap_or("")
    }

    /// A diode's lead ends as drawn, in page coordinates.
    struct DrawnDiode {
        anode: (f64, f64),
        cathode: (f64, f64),
    }

    /// Every drawn diode's anode and cathode ends in page coordinates, read from the symbol
    /// itself: the triangle's tip points at the cathode bar, its flat side faces the anode.
    fn drawn_diodes(svg: &str) -> Vec<DrawnDiode> {
        let mut diodes = Vec::new();
        for group in svg.split("<g ").skip(1) {
            let group = group.split("</g>").next().unwrap_or("");
            let Some(triangle) = group.split("<polygon").nth(1) else { continue };
            let place = numbers(attribute(group, "transform"));
            let [tx, ty, angle_deg] = place[..] else { continue };
            let points = numbers(attribute(triangle, "points"));
            let vertices: Vec<(f64, f64)> = points.chunks(2).map(|p| (p[0], p[1])).collect();
            let Some(tip) = vertices.iter().find(|v| v.1 == 0.0) else { continue };
            let flat_x = vertices.iter().filter(|v| v.1 != 0.0).map(|v| v.0).sum::<f64>() / 2.0;
            let lead_xs: Vec<f64> = group
                .split("<line")
                .skip(1)
                .flat_map(|l| [attribute(l, "x1"), attribute(l, "x2")])
                .filter_map(|x| x.parse().ok())
                .collect();
            let (near, far) = (
                lead_xs.iter().cloned().fold(f64::MAX, f64::min),
                lead_xs.iter().cloned().fold(f64::MIN, f64::max),
            );
            let (anode_x, cathode_x) = if flat_x < tip.0 { (near, far) } else { (far, near) };
            let (sin, cos) = angle_deg.to_radians().sin_cos();
            let global = |x: f64| (tx + x * cos, ty + x * sin);
            diodes.push(DrawnDiode { anode: global(anode_x), cathode: global(cathode_x) });
        }
        diodes
    }

    /// Where the net label `name` is written, for every label of that name.
    fn net_labels(svg: &str, name: &str) -> Vec<(f64, f64)> {
        svg.split("<text ")
            .skip(1)
            .filter(|t| {
                attribute(t, "class") == "net"
                    && t.split('>').nth(1).and_then(|r| r.split('<').next()) == Some(name)
            })
            .filter_map(|t| Some((attribute(t, "x").parse().ok()?, attribute(t, "y").parse().ok()?)))
            .collect()
    }

    fn distance(a: (f64, f64), b: (f64, f64)) -> f64 {
        ((a.0 - b.0).powi(2) + (a.1 - b.1).powi(2)).sqrt()
    }

    /// Each steering diode's end at the trigger network's label of `nets` (a base in base
    /// steering, a collector in collector steering) must be its anode for NPN and its cathode
    /// for PNP: the PNP stage is the NPN one with every current reversed (the simulation runs
    /// that mirror). Labels below the stage (y > 420) are the trigger network's.
    fn check_diodes(transistor_id: &str, steering: Steering, nets: [&str; 2], anode_at_net: bool) {
        let svg = super::stage_svg(&designed(transistor_id, steering));
        let diodes = drawn_diodes(&svg);
        assert_eq!(diodes.len(), 2, "{transistor_id} {steering:?}: two steering diodes drawn");
        for net in nets {
            let labels: Vec<_> = net_labels(&svg, net).into_iter().filter(|l| l.1 > 420.0).collect();
            assert_eq!(labels.len(), 1, "{transistor_id} {steering:?}: one trigger-network label {net}");
            let label = labels[0];
            let nearest = |ends: &mut dyn Iterator<Item = (f64, f64)>| {
                ends.map(|end| distance(end, label)).fold(f64::MAX, f64::min)
            };
            let to_anode = nearest(&mut diodes.iter().map(|d| d.anode));
            let to_cathode = nearest(&mut diodes.iter().map(|d| d.cathode));
            assert_eq!(
                to_anode < to_cathode,
                anode_at_net,
                "{transistor_id} {steering:?}: at {net} the diode's anode is {to_anode:.1} away, its cathode {to_cathode:.1}"
            );
        }
    }

    /// Every capacitor plate in page coordinates, as segments (groups without a diode's
    /// triangle; a diode's bar is also a plate-class line).
    fn capacitor_plates(svg: &str) -> Vec<[(f64, f64); 2]> {
        let mut plates = Vec::new();
        for group in svg.split("<g ").skip(1) {
            let group = group.split("</g>").next().unwrap_or("");
            if group.contains("<polygon") {
                continue;
            }
            let place = numbers(attribute(group, "transform"));
            let [tx, ty, angle_deg] = place[..] else { continue };
            let (sin, cos) = angle_deg.to_radians().sin_cos();
            let global = |x: f64, y: f64| (tx + x * cos - y * sin, ty + x * sin + y * cos);
            for line in group.split("<line").skip(1).filter(|l| attribute(l, "class") == "plate") {
                let n: Vec<f64> =
                    ["x1", "y1", "x2", "y2"].iter().filter_map(|k| attribute(line, k).parse().ok()).collect();
                if let [x1, y1, x2, y2] = n[..] {
                    plates.push([global(x1, y1), global(x2, y2)]);
                }
            }
        }
        plates
    }

    /// Every text's box, generously estimated from the schematic's 11–12 px sans-serif: 0.62
    /// em a character, from the cap height above the baseline to the descenders below.
    fn text_boxes(svg: &str) -> Vec<(String, [f64; 4])> {
        svg.split("<text ")
            .skip(1)
            .filter_map(|t| {
                let text = t.split('>').nth(1)?.split('<').next()?.to_string();
                let (x, y): (f64, f64) = (attribute(t, "x").parse().ok()?, attribute(t, "y").parse().ok()?);
                let width = 0.62 * 11.0 * text.chars().count() as f64;
                let left = match attribute(t, "text-anchor") {
                    "middle" => x - width / 2.0,
                    "end" => x - width,
                    _ => x,
                };
                Some((text, [left, y - 9.0, left + width, y + 3.0]))
            })
            .collect()
    }

    /// Whether the segment from `a` to `b` passes through the box (sampled finely enough for
    /// 20-unit plates).
    fn crosses(a: (f64, f64), b: (f64, f64), [x0, y0, x1, y1]: [f64; 4]) -> bool {
        (0..=40).map(|i| f64::from(i) / 40.0).any(|f| {
            let (x, y) = (a.0 + f * (b.0 - a.0), a.1 + f * (b.1 - a.1));
            x0 <= x && x <= x1 && y0 <= y && y <= y1
        })
    }

    #[test]
    fn no_label_runs_through_a_capacitor_plate_or_another_label() {
        for (transistor, steering) in [
            ("si-npn-switch-40v", Steering::Base),
            ("si-npn-switch-40v", Steering::Collector),
            ("si-pnp-switch-40v", Steering::Base),
        ] {
            let svg = super::stage_svg(&designed(transistor, steering));
            let plates = capacitor_plates(&svg);
            assert!(
                plates.len() >= 6,
                "{transistor} {steering:?}: C1 twice and Ct drawn, {} plates",
                plates.len()
            );
            let boxes = text_boxes(&svg);
            for (text, frame) in &boxes {
                for [a, b] in &plates {
                    assert!(
                        !crosses(*a, *b, *frame),
                        "{transistor} {steering:?}: \"{text}\" runs through a plate at {a:?}–{b:?}"
                    );
                }
            }
            // Nor does any text sit on another.
            for (i, (first, a)) in boxes.iter().enumerate() {
                for (second, b) in boxes.iter().skip(i + 1) {
                    let apart = a[2] <= b[0] || b[2] <= a[0] || a[3] <= b[1] || b[3] <= a[1];
                    assert!(
                        apart,
                        "{transistor} {steering:?}: \"{first}\" {a:?} overlaps \"{second}\" {b:?}"
                    );
                }
            }
        }
    }

    #[test]
    fn steering_diodes_point_by_polarity_with_base_steering() {
        check_diodes("si-npn-switch-40v", Steering::Base, ["B1", "B2"], true);
        check_diodes("si-pnp-switch-40v", Steering::Base, ["B1", "B2"], false);
        check_diodes("ge-pnp-alloy-15v", Steering::Base, ["B1", "B2"], false);
    }

    #[test]
    fn steering_diodes_point_by_polarity_with_collector_steering() {
        check_diodes("si-npn-switch-40v", Steering::Collector, ["C1", "C2"], true);
        check_diodes("si-pnp-switch-40v", Steering::Collector, ["C1", "C2"], false);
    }

    /// Regression: the schematic's unscoped `line, polyline, text` rules once restyled every
    /// other SVG on the page (the printed charts came out black, in the schematic's font).
    #[test]
    fn style_rules_apply_to_the_schematic_only() {
        let mut file = DesignFile::demo();
        let input = file.synthesis_input().unwrap_or_else(|e| unreachable!("{e:?}"));
        let outcome =
            flipwright::stage::synthesis::synthesise(&input).unwrap_or_else(|e| unreachable!("{e}"));
        file.values = Some(outcome.values);
        let design = file
            .stage_input(None)
            .and_then(flipwright::stage::StageDesign::new)
            .unwrap_or_else(|e| unreachable!("{e:?}"));
        let svg = super::stage_svg(&design);
        let style = svg.split("<style>").nth(1).and_then(|s| s.split("</style>").next()).unwrap_or("");
        assert!(!style.is_empty(), "the schematic has its style element");
        for rule in style.split('}').map(str::trim).filter(|r| !r.is_empty()) {
            let selectors = rule.split('{').next().unwrap_or("");
            for selector in selectors.split(',') {
                assert!(selector.trim().starts_with(".schematic "), "unscoped selector {selector:?}");
            }
        }
    }
}
