// hand_sincos_iterative: 16-bit sine/cosine, written by hand as the reference for
// benchmarks/hardware.py (not generated).
//
// Shift-and-add rotation, 16 iterations, one iteration per clock on one set of adders.
// An angle is taken when in_valid and in_ready are high at a rising edge; out_valid is high
// for the one clock after the 16th edge that follows (latency 17 clocks counted as for the
// pipelined core: the result is read at the 17th edge), and out_cos/out_sin hold the result
// until the next one. in_ready is high when idle and in the last iteration's clock, so
// back-to-back angles run at one per 16 clocks. No back-pressure on the output.
//   in_angle   binary angle, 16 bits, 2^16 codes per turn
//   out_cos    two's complement, 16 bits, amplitude 32767
//   out_sin    two's complement, 16 bits, amplitude 32767
// x, y: 20 bits (4 guard bits, no headroom bit: the largest magnitude reached inside, over
// every angle in a numpy model of this arithmetic, is 524277 < 2^19; an overflow would show
// in the exhaustive check below). z: 20 bits, 2^20 codes per turn. The gain is taken out by
// the start value (32767 * 16 * K_16, rounded); the outputs are the top 16 bits of x and y
// (truncation; no saturation needed). Same arithmetic as hand_sincos_pipelined, so the
// same results.
// Worst error against numpy's 32767 cos/sin, all 65536 angles (simulated,
// benchmarks/hand_cores/check_hand_cores.py): 2.3447 LSB (RMS 0.7154 LSB).
// rst is synchronous and clears the control state only.

`resetall
`timescale 1ns / 1ps
`default_nettype none

module hand_sincos_iterative (
    input  wire clk,
    input  wire rst,
    input  wire in_valid,
    output wire in_ready,
    input  wire [15:0] in_angle,
    output wire out_valid,
    output wire [15:0] out_cos,
    output wire [15:0] out_sin
);

    localparam [3:0] LAST_STEP = 4'd15;  // 16 iterations: steps 0 to 15
    localparam XW = 20;  // x, y width
    localparam ZW = 20;  // z width
    localparam G = 4;    // guard bits

    localparam [XW-1:0] X_START = 20'd318366;  // round(32767 * 2^4 * 0.6072529351)

    // Quadrant fold: angles in the left half-plane are turned by half a turn (flip the MSB)
    // and the start vector is negated, so the rotation starts within +-1/4 turn.
    wire fold = in_angle[15] ^ in_angle[14];
    wire [XW-1:0] x_in = fold ? (~X_START + 20'd1) : X_START;
    wire [ZW-1:0] z_in = {in_angle[15] ^ fold, in_angle[14:0], 4'd0};

    reg busy_reg;
    reg [3:0] step_reg;  // iteration under way
    reg [XW-1:0] x_reg;
    reg [XW-1:0] y_reg;
    reg [ZW-1:0] z_reg;
    reg [XW-G-1:0] cos_reg;
    reg [XW-G-1:0] sin_reg;
    reg out_valid_reg;

    // atan(2^-step) in turns, 2^20 codes per turn, rounded to nearest.
    reg [ZW-1:0] atan_step;
    always @(*) begin
        case (step_reg)
            4'd0:  atan_step = 20'd131072;
            4'd1:  atan_step = 20'd77376;
            4'd2:  atan_step = 20'd40884;
            4'd3:  atan_step = 20'd20753;
            4'd4:  atan_step = 20'd10417;
            4'd5:  atan_step = 20'd5213;
            4'd6:  atan_step = 20'd2607;
            4'd7:  atan_step = 20'd1304;
            4'd8:  atan_step = 20'd652;
            4'd9:  atan_step = 20'd326;
            4'd10: atan_step = 20'd163;
            4'd11: atan_step = 20'd81;
            4'd12: atan_step = 20'd41;
            4'd13: atan_step = 20'd20;
            4'd14: atan_step = 20'd10;
            default: atan_step = 20'd5;
        endcase
    end

    // z >= 0: turn counter-clockwise (x -= y >> i, y += x >> i, z -= atan).
    wire ccw = ~z_reg[ZW-1];
    wire [XW-1:0] x_sh = $signed(x_reg) >>> step_reg;
    wire [XW-1:0] y_sh = $signed(y_reg) >>> step_reg;
    // a - b written as a + ~b + 1 with the add/sub select on b and the carry-in: one adder
    // per output instead of an adder, a subtractor and a mux.
    wire [XW-1:0] x_next = x_reg + (ccw ? ~y_sh : y_sh) + {{(XW-1){1'b0}}, ccw};
    wire [XW-1:0] y_next = y_reg + (ccw ? x_sh : ~x_sh) + {{(XW-1){1'b0}}, ~ccw};
    wire [ZW-1:0] z_next = z_reg + (ccw ? ~atan_step : atan_step) + {{(ZW-1){1'b0}}, ccw};

    wire last = busy_reg & (step_reg == LAST_STEP);
    wire start = in_valid & in_ready;
    assign in_ready = ~busy_reg | last;

    always @(posedge clk) begin
        if (rst) begin
            busy_reg <= 1'b0;
            out_valid_reg <= 1'b0;
        end else begin
            busy_reg <= start | (busy_reg & ~last);
            out_valid_reg <= last;
        end
    end

    always @(posedge clk) begin
        if (start) begin
            x_reg <= x_in;
            y_reg <= {XW{1'b0}};
            z_reg <= z_in;
            step_reg <= 4'd0;
        end else begin
            x_reg <= x_next;
            y_reg <= y_next;
            z_reg <= z_next;
            step_reg <= step_reg + 4'd1;
        end
        if (last) begin
            cos_reg <= x_next[XW-1:G];
            sin_reg <= y_next[XW-1:G];
        end
    end

    assign out_valid = out_valid_reg;
    assign out_cos = cos_reg;
    assign out_sin = sin_reg;

endmodule

`resetall
