// hand_sincos_pipelined: 16-bit sine/cosine, written by hand as the reference for
// benchmarks/hardware.py (not generated).
//
// Shift-and-add rotation, 16 iterations, one register stage per iteration, one new angle per
// clock, no back-pressure. Latency 16 clocks: the result of the angle taken at one rising
// edge is read, with out_valid high, at the 16th rising edge after it.
//   in_angle   binary angle, 16 bits, 2^16 codes per turn
//   out_cos    two's complement, 16 bits, amplitude 32767
//   out_sin    two's complement, 16 bits, amplitude 32767
// x, y: 20 bits (4 guard bits below the output LSB, no headroom bit: the largest magnitude
// reached inside, over every angle in a numpy model of this arithmetic, is 524277 < 2^19; an
// overflow would show in the exhaustive check below). z: 20 bits, 2^20 codes per turn.
// The gain is taken out by the start value (32767 * 16 * K_16, rounded); the outputs are the
// top 16 bits of x and y (truncation); they reach +32767 and -32768 and need no saturation.
// Worst error against numpy's 32767 cos/sin, all 65536 angles (simulated,
// benchmarks/hand_cores/check_hand_cores.py): 2.3447 LSB (RMS 0.7154 LSB).
// rst is synchronous and clears the valid bits only.

`resetall
`timescale 1ns / 1ps
`default_nettype none

module hand_sincos_pipelined (
    input  wire clk,
    input  wire rst,
    input  wire in_valid,
    input  wire [15:0] in_angle,
    output wire out_valid,
    output wire [15:0] out_cos,
    output wire [15:0] out_sin
);

    localparam N = 16;   // iterations
    localparam XW = 20;  // x, y width
    localparam ZW = 20;  // z width
    localparam G = 4;    // guard bits

    localparam [XW-1:0] X_START = 20'd318366;  // round(32767 * 2^4 * 0.6072529351)

    // atan(2^-i) in turns, 2^20 codes per turn, rounded to nearest.
    function [ZW-1:0] atan_turns(input integer i);
        case (i)
            0:  atan_turns = 20'd131072;
            1:  atan_turns = 20'd77376;
            2:  atan_turns = 20'd40884;
            3:  atan_turns = 20'd20753;
            4:  atan_turns = 20'd10417;
            5:  atan_turns = 20'd5213;
            6:  atan_turns = 20'd2607;
            7:  atan_turns = 20'd1304;
            8:  atan_turns = 20'd652;
            9:  atan_turns = 20'd326;
            10: atan_turns = 20'd163;
            11: atan_turns = 20'd81;
            12: atan_turns = 20'd41;
            13: atan_turns = 20'd20;
            14: atan_turns = 20'd10;
            default: atan_turns = 20'd5;
        endcase
    endfunction

    // Quadrant fold: angles in the left half-plane are turned by half a turn (flip the MSB)
    // and the start vector is negated, so the rotation starts within +-1/4 turn.
    wire fold = in_angle[15] ^ in_angle[14];
    wire [XW-1:0] x_in = fold ? (~X_START + 20'd1) : X_START;
    wire [ZW-1:0] z_in = {in_angle[15] ^ fold, in_angle[14:0], 4'd0};

    wire [XW-1:0] x_pipe [0:N-1];
    wire [XW-1:0] y_pipe [0:N-1];
    wire [ZW-1:0] z_pipe [0:N-1];
    wire [N:0] v_pipe;

    assign x_pipe[0] = x_in;
    assign y_pipe[0] = {XW{1'b0}};
    assign z_pipe[0] = z_in;
    assign v_pipe[0] = in_valid;

    genvar i;
    generate
        for (i = 0; i < N; i = i + 1) begin : g_stage
            // z >= 0: turn counter-clockwise (x -= y >> i, y += x >> i, z -= atan).
            wire ccw = ~z_pipe[i][ZW-1];
            wire signed [XW-1:0] x_cur = x_pipe[i];
            wire signed [XW-1:0] y_cur = y_pipe[i];
            wire [XW-1:0] x_sh = x_cur >>> i;
            wire [XW-1:0] y_sh = y_cur >>> i;
            // a - b written as a + ~b + 1 with the add/sub select on b and the carry-in:
            // one adder per output instead of an adder, a subtractor and a mux.
            wire [XW-1:0] x_next = x_pipe[i] + (ccw ? ~y_sh : y_sh) + {{(XW-1){1'b0}}, ccw};
            wire [XW-1:0] y_next = y_pipe[i] + (ccw ? x_sh : ~x_sh) + {{(XW-1){1'b0}}, ~ccw};

            reg v_reg;
            always @(posedge clk) begin
                if (rst) v_reg <= 1'b0;
                else     v_reg <= v_pipe[i];
            end
            assign v_pipe[i+1] = v_reg;

            if (i < N - 1) begin : g_rot
                wire [ZW-1:0] z_next = z_pipe[i] + (ccw ? ~atan_turns(i) : atan_turns(i)) + {{(ZW-1){1'b0}}, ccw};
                reg [XW-1:0] x_reg;
                reg [XW-1:0] y_reg;
                reg [ZW-1:0] z_reg;
                always @(posedge clk) begin
                    x_reg <= x_next;
                    y_reg <= y_next;
                    z_reg <= z_next;
                end
                assign x_pipe[i+1] = x_reg;
                assign y_pipe[i+1] = y_reg;
                assign z_pipe[i+1] = z_reg;
            end else begin : g_last
                // The last stage keeps only the output bits (truncation) and needs no z.
                reg [XW-G-1:0] x_reg;
                reg [XW-G-1:0] y_reg;
                always @(posedge clk) begin
                    x_reg <= x_next[XW-1:G];
                    y_reg <= y_next[XW-1:G];
                end
                assign out_cos = x_reg;
                assign out_sin = y_reg;
                // Dropped by truncation; the name tells lint they are meant to go unread.
                wire [2*G-1:0] unused_guard = {x_next[G-1:0], y_next[G-1:0]};
            end
        end
    endgenerate

    assign out_valid = v_pipe[N];

endmodule

`resetall
