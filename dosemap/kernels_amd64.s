//go:build amd64 && !purego

#include "textflag.h"

// Constants of cemRatesAVX2, each repeated in the four lanes of a 256-bit
// register (IEEE 754 bit patterns): 1/n! for n = 2..11 (Taylor
// coefficients of e^s), ln 2, 1.5·2^52 (adding it rounds to an integer held
// in the low mantissa bits), 43, −1022, 1023, 1 and the integer 1023 (the
// exponent bias).
#define CONST4(name, bits) \
	DATA name<>+0(SB)/8, $bits \
	DATA name<>+8(SB)/8, $bits \
	DATA name<>+16(SB)/8, $bits \
	DATA name<>+24(SB)/8, $bits \
	GLOBL name<>(SB), RODATA|NOPTR, $32

CONST4(rc2, 0x3FE0000000000000)
CONST4(rc3, 0x3FC5555555555555)
CONST4(rc4, 0x3FA5555555555555)
CONST4(rc5, 0x3F81111111111111)
CONST4(rc6, 0x3F56C16C16C16C17)
CONST4(rc7, 0x3F2A01A01A01A01A)
CONST4(rc8, 0x3EFA01A01A01A01A)
CONST4(rc9, 0x3EC71DE3A556C734)
CONST4(rc10, 0x3E927E4FB7789F5C)
CONST4(rc11, 0x3E5AE64567F544E4)
CONST4(rln2, 0x3FE62E42FEFA39EF)
CONST4(rmagic, 0x4338000000000000)
CONST4(r43, 0x4045800000000000)
CONST4(rlow, 0xC08FF00000000000)
CONST4(rhigh, 0x408FF80000000000)
CONST4(rone, 0x3FF0000000000000)
CONST4(rbias, 0x00000000000003FF)

// func cemRatesAVX2(t *float32, f *float64, n int, brk, la, lb float64) (fine int)
TEXT ·cemRatesAVX2(SB), NOSPLIT, $0-56
	MOVQ t+0(FP), SI
	MOVQ f+8(FP), DI
	MOVQ n+16(FP), CX
	VBROADCASTSD brk+24(FP), Y15
	VBROADCASTSD la+32(FP), Y14
	VBROADCASTSD lb+40(FP), Y13
	VMOVUPD r43<>(SB), Y12
	VMOVUPD rmagic<>(SB), Y11
	VMOVUPD rln2<>(SB), Y10
	VMOVUPD rlow<>(SB), Y9
	VMOVUPD rhigh<>(SB), Y8
	VMOVDQU rbias<>(SB), Y7
	VMOVUPD rone<>(SB), Y5
	XORQ R9, R9
	TESTQ CX, CX
	JLE done

loop:
	VCVTPS2PD (SI), Y0          // x = float64(t[i])
	VCMPPD $0x0D, Y15, Y0, Y1   // x >= brk (GE_OS; false for NaN)
	VBLENDVPD Y1, Y14, Y13, Y2  // e = la where x >= brk, else lb
	VSUBPD Y12, Y0, Y3          // x - 43
	VMULPD Y2, Y3, Y3           // y = e·(x - 43)

	// Lanes fine for the kernel: −1022 < y < 1023, or y NaN.
	VCMPPD $0x1E, Y9, Y3, Y4    // y > -1022 (GT_OQ)
	VCMPPD $0x11, Y8, Y3, Y1    // y < 1023 (LT_OQ)
	VANDPD Y1, Y4, Y4
	VCMPPD $0x03, Y3, Y3, Y1    // y NaN (UNORD_Q)
	VORPD Y1, Y4, Y4
	VMOVMSKPD Y4, AX
	POPCNTL AX, AX
	ADDQ AX, R9

	VADDPD Y11, Y3, Y4          // t = y + magic: round(y) in the low bits
	VSUBPD Y11, Y4, Y1          // k = round(y) as a float
	VSUBPD Y1, Y3, Y1           // r = y - k, |r| <= 1/2
	VMULPD Y10, Y1, Y1          // s = r·ln2

	VMOVUPD rc11<>(SB), Y2      // p = Σ s^n/n!, Horner from n = 11
	VFMADD213PD rc10<>(SB), Y1, Y2
	VFMADD213PD rc9<>(SB), Y1, Y2
	VFMADD213PD rc8<>(SB), Y1, Y2
	VFMADD213PD rc7<>(SB), Y1, Y2
	VFMADD213PD rc6<>(SB), Y1, Y2
	VFMADD213PD rc5<>(SB), Y1, Y2
	VFMADD213PD rc4<>(SB), Y1, Y2
	VFMADD213PD rc3<>(SB), Y1, Y2
	VFMADD213PD rc2<>(SB), Y1, Y2
	VFMADD213PD Y5, Y1, Y2
	VFMADD213PD Y5, Y1, Y2

	VPSUBQ Y11, Y4, Y4          // integer k = bits(t) - bits(magic)
	VPADDQ Y7, Y4, Y4           // k + 1023
	VPSLLQ $52, Y4, Y4          // 2^k
	VMULPD Y4, Y2, Y2           // 2^k · 2^r
	VMOVUPD Y2, (DI)

	ADDQ $16, SI
	ADDQ $32, DI
	SUBQ $4, CX
	JGT loop

done:
	VZEROUPPER
	MOVQ R9, fine+48(FP)
	RET

// Constants of unwrapAVX2: π, −π, 2π, 1/(2π) (Go's constants rounded to
// float64), 0.5 and 2^20 (four lanes, for memory operands) and the float32
// NaN of math.NaN().
DATA upi<>+0(SB)/8, $0x400921FB54442D18
GLOBL upi<>(SB), RODATA|NOPTR, $8
DATA umpi<>+0(SB)/8, $0xC00921FB54442D18
GLOBL umpi<>(SB), RODATA|NOPTR, $8
DATA u2pi<>+0(SB)/8, $0x401921FB54442D18
GLOBL u2pi<>(SB), RODATA|NOPTR, $8
DATA uinv2pi<>+0(SB)/8, $0x3FC45F306DC9C883
GLOBL uinv2pi<>(SB), RODATA|NOPTR, $8
DATA unan<>+0(SB)/4, $0x7FC00000
GLOBL unan<>(SB), RODATA|NOPTR, $4
CONST4(uhalf, 0x3FE0000000000000)
CONST4(ubig, 0x4130000000000000)

// func unwrapAVX2(v, ref, last *float32, turns *int16, out, mag *float32, n int, thr float32) (wraps int)
TEXT ·unwrapAVX2(SB), NOSPLIT, $0-72
	MOVQ v+0(FP), SI
	MOVQ ref+8(FP), DX
	MOVQ last+16(FP), BX
	MOVQ turns+24(FP), R10
	MOVQ out+32(FP), DI
	MOVQ mag+40(FP), R8
	MOVQ n+48(FP), CX
	VMOVSS thr+56(FP), X11
	VCVTSS2SD X11, X11, X11
	VBROADCASTSD X11, Y11       // thr as float64 (exact)
	VBROADCASTSD upi<>(SB), Y15
	VBROADCASTSD umpi<>(SB), Y14
	VBROADCASTSD u2pi<>(SB), Y13
	VBROADCASTSD uinv2pi<>(SB), Y12
	VBROADCASTSS unan<>(SB), X10
	XORQ R11, R11
	TESTQ CX, CX
	JLE udone

uloop:
	// Voxels with signal: phase not NaN, magnitude >= thr.
	VCVTPS2PD (SI), Y0          // v
	VCVTPS2PD (R8), Y1          // magnitude
	VCMPPD $0x1D, Y11, Y1, Y1   // magnitude >= thr (GE_OQ; false for NaN)
	VCMPPD $0x00, Y0, Y0, Y2    // v == v (EQ_OQ)
	VANDPD Y2, Y1, Y1           // valid

	// w = wrapPhase(v - ref): x where -π < x <= π, else x - 2π·ceil((x-π)/(2π)).
	VCVTPS2PD (DX), Y2
	VSUBPD Y2, Y0, Y0           // x = v - ref
	VSUBPD Y15, Y0, Y3          // x - π
	VDIVPD Y13, Y3, Y3          // (x - π)/(2π)
	VROUNDPD $2, Y3, Y3         // ceil
	VMULPD Y13, Y3, Y3          // 2π·ceil
	VSUBPD Y3, Y0, Y3           // x - 2π·ceil
	VCMPPD $0x1E, Y14, Y0, Y4   // x > -π (GT_OQ)
	VCMPPD $0x12, Y15, Y0, Y5   // x <= π (LE_OQ)
	VANDPD Y5, Y4, Y4
	VBLENDVPD Y4, Y0, Y3, Y0    // w

	// Turn count k nearest to the last change: 0 where -π < d < π.
	VCVTPS2PD (BX), Y3
	VSUBPD Y0, Y3, Y3           // d = last - w
	VCMPPD $0x1E, Y14, Y3, Y4   // d > -π
	VCMPPD $0x11, Y15, Y3, Y5   // d < π (LT_OQ)
	VANDPD Y5, Y4, Y4           // near
	VMULPD Y12, Y3, Y3          // d/(2π)
	VADDPD uhalf<>(SB), Y3, Y3  // + 0.5
	VADDPD ubig<>(SB), Y3, Y3   // + 2^20
	VCVTTPD2DQY Y3, X3          // truncated
	VCVTDQ2PD X3, Y3
	VSUBPD ubig<>(SB), Y3, Y3   // k
	VANDNPD Y3, Y4, Y3          // k = 0 where near
	VMULPD Y13, Y3, Y5          // 2π·k
	VADDPD Y5, Y0, Y5           // w + 2π·k
	VBLENDVPD Y4, Y0, Y5, Y5    // u = w where near
	VCVTPD2PSY Y5, X5           // u as float32

	// Turn counts as int16: count and keep the changes of valid voxels.
	VCVTTPD2DQY Y3, X6
	VPSLLD $16, X6, X6
	VPSRAD $16, X6, X6          // int16(k)
	VPMOVSXWD (R10), X7         // the voxels' turn counts
	VPCMPEQD X6, X7, X8         // unchanged
	VEXTRACTF128 $1, Y1, X9
	VSHUFPS $0x88, X9, X1, X9   // valid as 32-bit lanes
	VPANDN X9, X8, X8           // valid and changed
	VMOVMSKPS X8, AX
	POPCNTL AX, AX
	ADDQ AX, R11
	VBLENDVPS X9, X6, X7, X7    // new turn counts where valid
	VPACKSSDW X7, X7, X7
	VMOVQ X7, (R10)
	VMOVUPS (BX), X2
	VBLENDVPS X9, X5, X2, X2    // last = u where valid
	VMOVUPS X2, (BX)
	VBLENDVPS X9, X5, X10, X2   // out = u where valid, else NaN
	VMOVUPS X2, (DI)

	ADDQ $16, SI
	ADDQ $16, DX
	ADDQ $16, BX
	ADDQ $8, R10
	ADDQ $16, DI
	ADDQ $16, R8
	SUBQ $4, CX
	JGT uloop

udone:
	VZEROUPPER
	MOVQ R11, wraps+64(FP)
	RET

// Lane numbers 0..3 and the step 4 (int32).
DATA cidx<>+0(SB)/4, $0
DATA cidx<>+4(SB)/4, $1
DATA cidx<>+8(SB)/4, $2
DATA cidx<>+12(SB)/4, $3
GLOBL cidx<>(SB), RODATA|NOPTR, $16
DATA cfour<>+0(SB)/4, $4
DATA cfour<>+4(SB)/4, $4
DATA cfour<>+8(SB)/4, $4
DATA cfour<>+12(SB)/4, $4
GLOBL cfour<>(SB), RODATA|NOPTR, $16

// func convertAVX2(u *float32, x *float64, ms *float32, n int, k *[4]float64, best *[4]float32, at *[4]int32) (msum float64, valid int)
TEXT ·convertAVX2(SB), NOSPLIT, $0-72
	MOVQ u+0(FP), SI
	MOVQ x+8(FP), DX
	MOVQ ms+16(FP), R8
	MOVQ n+24(FP), CX
	MOVQ k+32(FP), AX
	VBROADCASTSD 0(AX), Y15     // inv
	VBROADCASTSD 8(AX), Y14     // a
	VBROADCASTSD 16(AX), Y13    // bb
	VBROADCASTSD 24(AX), Y12    // c
	MOVQ best+40(FP), R12
	MOVQ at+48(FP), R13
	VMOVUPS (R12), X11          // per-lane largest
	VMOVDQU (R13), X10          // per-lane position
	VMOVDQU cidx<>(SB), X9      // positions of the current four
	VXORPD Y8, Y8, Y8           // magnitude sums
	XORQ R9, R9
	TESTQ CX, CX
	JLE cdone

cloop:
	VMOVUPS (SI), X0            // u
	VCMPPS $0x00, X0, X0, X7    // valid (u == u), 32-bit lanes
	VCVTPS2PD X0, Y1
	VCMPPD $0x00, Y1, Y1, Y2    // valid, 64-bit lanes
	VMOVUPD (DX), Y3            // x
	VMULPD Y12, Y3, Y4          // x·c
	VADDPD Y4, Y13, Y4          // bb + x·c
	VMULPD Y4, Y3, Y4           // x·(bb + x·c)
	VADDPD Y4, Y14, Y4          // a + x·(bb + x·c)
	VMULPD Y15, Y1, Y5          // u·inv
	VADDPD Y4, Y5, Y5           // u·inv + (a + ...)
	VCVTPD2PSY Y5, X5           // T as float32
	VBLENDVPS X7, X5, X0, X5    // NaN voxels keep their value
	VMOVUPS X5, (SI)
	VCMPPS $0x1E, X11, X5, X6   // T > largest (GT_OQ; false for NaN)
	VBLENDVPS X6, X5, X11, X11
	VBLENDVPS X6, X9, X10, X10
	VPADDD cfour<>(SB), X9, X9
	VCVTPS2PD (R8), Y6          // magnitudes
	VANDPD Y2, Y6, Y6           // of the valid voxels
	VADDPD Y6, Y8, Y8
	VMOVMSKPD Y2, AX
	POPCNTL AX, AX
	ADDQ AX, R9
	ADDQ $16, SI
	ADDQ $32, DX
	ADDQ $16, R8
	SUBQ $4, CX
	JGT cloop

cdone:
	VMOVUPS X11, (R12)
	VMOVDQU X10, (R13)
	VEXTRACTF128 $1, Y8, X0
	VADDPD X0, X8, X0           // lanes 0+2, 1+3
	VHADDPD X0, X0, X0          // their sum
	VZEROUPPER
	MOVSD X0, msum+56(FP)
	MOVQ R9, valid+64(FP)
	RET

// For each 4-bit mask, the four bytes 1 where its bit is set (the bools of
// four voxels as one little-endian word).
DATA tgot<>+0(SB)/4, $0x00000000
DATA tgot<>+4(SB)/4, $0x00000001
DATA tgot<>+8(SB)/4, $0x00000100
DATA tgot<>+12(SB)/4, $0x00000101
DATA tgot<>+16(SB)/4, $0x00010000
DATA tgot<>+20(SB)/4, $0x00010001
DATA tgot<>+24(SB)/4, $0x00010100
DATA tgot<>+28(SB)/4, $0x00010101
DATA tgot<>+32(SB)/4, $0x01000000
DATA tgot<>+36(SB)/4, $0x01000001
DATA tgot<>+40(SB)/4, $0x01000100
DATA tgot<>+44(SB)/4, $0x01000101
DATA tgot<>+48(SB)/4, $0x01010000
DATA tgot<>+52(SB)/4, $0x01010001
DATA tgot<>+56(SB)/4, $0x01010100
DATA tgot<>+60(SB)/4, $0x01010101
GLOBL tgot<>(SB), RODATA|NOPTR, $64

// func trapezoidAVX2(f, acc, prev *float64, got *bool, miss *uint32, n int, h float64)
TEXT ·trapezoidAVX2(SB), NOSPLIT, $0-56
	MOVQ f+0(FP), SI
	MOVQ acc+8(FP), DI
	MOVQ prev+16(FP), DX
	MOVQ got+24(FP), R8
	MOVQ miss+32(FP), R9
	MOVQ n+40(FP), CX
	VBROADCASTSD h+48(FP), Y15
	LEAQ tgot<>(SB), R10
	TESTQ CX, CX
	JLE tdone

tloop:
	VMOVUPD (SI), Y0            // f
	VMOVUPD (DX), Y1            // prev
	VADDPD Y0, Y1, Y1           // s = prev + f
	VMOVUPD Y0, (DX)            // prev = f
	VCMPPD $0x00, Y1, Y1, Y2    // s valid
	VMULPD Y15, Y1, Y1          // h·s
	VANDPD Y2, Y1, Y1           // 0 where s is NaN
	VADDPD (DI), Y1, Y1         // acc + h·s
	VMOVUPD Y1, (DI)
	VMOVMSKPD Y2, AX
	MOVL (R10)(AX*4), AX
	ORL AX, (R8)                // got where s valid
	VCMPPD $0x03, Y0, Y0, Y3    // f NaN
	VEXTRACTF128 $1, Y3, X4
	VSHUFPS $0x88, X4, X3, X3   // as 32-bit lanes (-1 where NaN)
	VMOVDQU (R9), X4
	VPSUBD X3, X4, X4           // miss + 1 where f is NaN
	VMOVDQU X4, (R9)
	ADDQ $32, SI
	ADDQ $32, DI
	ADDQ $32, DX
	ADDQ $4, R8
	ADDQ $16, R9
	SUBQ $4, CX
	JGT tloop

tdone:
	VZEROUPPER
	RET
