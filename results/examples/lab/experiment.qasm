OPENQASM 3.0;
include "stdgates.inc";
// codebench memory experiment: rotated_surface d=3, 3 rounds, Z basis
// noise model: device scale 1 {"device": "Larkspur Aster-17 (current generation) [682d1e9eac55]"}
// bit i of rec is measurement i; detectors and observables: see the description file (JSON)
qubit a0;
qubit a1;
qubit a2;
qubit a3;
qubit a4;
qubit a5;
qubit a6;
qubit a7;
qubit a8;
qubit m0;
qubit m1;
qubit m2;
qubit m3;
qubit m4;
qubit m5;
qubit m6;
qubit m7;
bit[33] rec;
// layer 0: reset, round 0, opens the round
box[250ns] {
  reset a0;
  reset a1;
  reset a2;
  reset a3;
  reset a4;
  reset a5;
  reset a6;
  reset a7;
  reset a8;
  reset m1;
  reset m3;
  reset m4;
  reset m6;
  reset m0;
  reset m2;
  reset m5;
  reset m7;
}
barrier;
// layer 1: gate1, round 0
box[25ns] {
  h a0;
  h a4;
  h a6;
  h m0;
  h m2;
  h m3;
  h m4;
  h m5;
  h m6;
  h m7;
}
barrier;
// layer 2: gate2, round 0
box[40ns] {
  cz m2, a0;
  cz a1, m3;
  cz a3, m4;
  cz m5, a4;
  cz a5, m6;
  cz m7, a6;
}
barrier;
// layer 3: gate1, round 0
box[25ns] {
  h a0;
  h a1;
  h a4;
  h a5;
  h a6;
  h a7;
}
barrier;
// layer 4: gate2, round 0
box[40ns] {
  cz m2, a1;
  cz a4, m3;
  cz a6, m4;
  cz m5, a5;
  cz a8, m6;
  cz m7, a7;
}
barrier;
// layer 5: gate1, round 0
box[25ns] {
  h a3;
  h a5;
  h m1;
  h m6;
}
barrier;
// layer 6: gate2, round 0
box[40ns] {
  cz m0, a1;
  cz a0, m1;
  cz m2, a3;
  cz a2, m3;
  cz a4, m4;
  cz m5, a7;
}
barrier;
// layer 7: gate1, round 0
box[25ns] {
  h a1;
  h a2;
  h a3;
  h a4;
  h a7;
  h a8;
}
barrier;
// layer 8: gate2, round 0
box[40ns] {
  cz m0, a2;
  cz a3, m1;
  cz m2, a4;
  cz a5, m3;
  cz a7, m4;
  cz m5, a8;
}
barrier;
// layer 9: gate1, round 0
box[25ns] {
  h a2;
  h a4;
  h a8;
  h m0;
  h m1;
  h m2;
  h m3;
  h m4;
  h m5;
  h m7;
}
barrier;
// layer 10: measure, round 0
box[600ns] {
  rec[0] = measure m1;
  rec[1] = measure m3;
  rec[2] = measure m4;
  rec[3] = measure m6;
  rec[4] = measure m0;
  rec[5] = measure m2;
  rec[6] = measure m5;
  rec[7] = measure m7;
}
barrier;
// layer 11: reset, round 1, opens the round
box[250ns] {
  reset m1;
  reset m3;
  reset m4;
  reset m6;
  reset m0;
  reset m2;
  reset m5;
  reset m7;
}
barrier;
// layer 12: gate1, round 1
box[25ns] {
  h a0;
  h a4;
  h a6;
  h m0;
  h m2;
  h m3;
  h m4;
  h m5;
  h m6;
  h m7;
}
barrier;
// layer 13: gate2, round 1
box[40ns] {
  cz m2, a0;
  cz a1, m3;
  cz a3, m4;
  cz m5, a4;
  cz a5, m6;
  cz m7, a6;
}
barrier;
// layer 14: gate1, round 1
box[25ns] {
  h a0;
  h a1;
  h a4;
  h a5;
  h a6;
  h a7;
}
barrier;
// layer 15: gate2, round 1
box[40ns] {
  cz m2, a1;
  cz a4, m3;
  cz a6, m4;
  cz m5, a5;
  cz a8, m6;
  cz m7, a7;
}
barrier;
// layer 16: gate1, round 1
box[25ns] {
  h a3;
  h a5;
  h m1;
  h m6;
}
barrier;
// layer 17: gate2, round 1
box[40ns] {
  cz m0, a1;
  cz a0, m1;
  cz m2, a3;
  cz a2, m3;
  cz a4, m4;
  cz m5, a7;
}
barrier;
// layer 18: gate1, round 1
box[25ns] {
  h a1;
  h a2;
  h a3;
  h a4;
  h a7;
  h a8;
}
barrier;
// layer 19: gate2, round 1
box[40ns] {
  cz m0, a2;
  cz a3, m1;
  cz m2, a4;
  cz a5, m3;
  cz a7, m4;
  cz m5, a8;
}
barrier;
// layer 20: gate1, round 1
box[25ns] {
  h a2;
  h a4;
  h a8;
  h m0;
  h m1;
  h m2;
  h m3;
  h m4;
  h m5;
  h m7;
}
barrier;
// layer 21: measure, round 1
box[600ns] {
  rec[8] = measure m1;
  rec[9] = measure m3;
  rec[10] = measure m4;
  rec[11] = measure m6;
  rec[12] = measure m0;
  rec[13] = measure m2;
  rec[14] = measure m5;
  rec[15] = measure m7;
}
barrier;
// layer 22: reset, round 2, opens the round
box[250ns] {
  reset m1;
  reset m3;
  reset m4;
  reset m6;
  reset m0;
  reset m2;
  reset m5;
  reset m7;
}
barrier;
// layer 23: gate1, round 2
box[25ns] {
  h a0;
  h a4;
  h a6;
  h m0;
  h m2;
  h m3;
  h m4;
  h m5;
  h m6;
  h m7;
}
barrier;
// layer 24: gate2, round 2
box[40ns] {
  cz m2, a0;
  cz a1, m3;
  cz a3, m4;
  cz m5, a4;
  cz a5, m6;
  cz m7, a6;
}
barrier;
// layer 25: gate1, round 2
box[25ns] {
  h a0;
  h a1;
  h a4;
  h a5;
  h a6;
  h a7;
}
barrier;
// layer 26: gate2, round 2
box[40ns] {
  cz m2, a1;
  cz a4, m3;
  cz a6, m4;
  cz m5, a5;
  cz a8, m6;
  cz m7, a7;
}
barrier;
// layer 27: gate1, round 2
box[25ns] {
  h a3;
  h a5;
  h m1;
  h m6;
}
barrier;
// layer 28: gate2, round 2
box[40ns] {
  cz m0, a1;
  cz a0, m1;
  cz m2, a3;
  cz a2, m3;
  cz a4, m4;
  cz m5, a7;
}
barrier;
// layer 29: gate1, round 2
box[25ns] {
  h a1;
  h a2;
  h a3;
  h a4;
  h a7;
  h a8;
}
barrier;
// layer 30: gate2, round 2
box[40ns] {
  cz m0, a2;
  cz a3, m1;
  cz m2, a4;
  cz a5, m3;
  cz a7, m4;
  cz m5, a8;
}
barrier;
// layer 31: gate1, round 2
box[25ns] {
  h a2;
  h a4;
  h a8;
  h m0;
  h m1;
  h m2;
  h m3;
  h m4;
  h m5;
  h m7;
}
barrier;
// layer 32: measure, round 2
box[600ns] {
  rec[16] = measure m1;
  rec[17] = measure m3;
  rec[18] = measure m4;
  rec[19] = measure m6;
  rec[20] = measure m0;
  rec[21] = measure m2;
  rec[22] = measure m5;
  rec[23] = measure m7;
}
barrier;
// layer 33: measure, round 3
box[600ns] {
  rec[24] = measure a0;
  rec[25] = measure a1;
  rec[26] = measure a2;
  rec[27] = measure a3;
  rec[28] = measure a4;
  rec[29] = measure a5;
  rec[30] = measure a6;
  rec[31] = measure a7;
  rec[32] = measure a8;
}
