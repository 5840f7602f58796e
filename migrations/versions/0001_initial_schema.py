"""Initial schema: substances, studies, versioned runs, observations, fit cache, API keys, idempotency records, audit trail.

Revision ID: 0001
Revises: 
Create Date: 2026-12-02 05:50:21.628751
"""

from __future__ import annotations

from alembic import op
import sqlalchemy as sa
import service.models


revision = '0001'
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('api_key',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('label', sa.String(length=200), nullable=False),
    sa.Column('key_hash', sa.String(length=128), nullable=False),
    sa.Column('scopes', sa.String(length=200), nullable=False),
    sa.Column('created_at', service.models.UTCDateTime(timezone=True), nullable=False),
    sa.Column('revoked_at', service.models.UTCDateTime(timezone=True), nullable=True),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_api_key')),
    sa.UniqueConstraint('key_hash', name=op.f('uq_api_key_key_hash'))
    )
    op.create_table('audit_event',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('at', service.models.UTCDateTime(timezone=True), nullable=False),
    sa.Column('actor', sa.String(length=200), nullable=False),
    sa.Column('entity', sa.String(length=50), nullable=False),
    sa.Column('entity_id', sa.String(length=64), nullable=False),
    sa.Column('version', sa.Integer(), nullable=True),
    sa.Column('action', sa.String(length=50), nullable=False),
    sa.Column('reason', sa.Text(), nullable=True),
    sa.Column('substance_id', sa.Integer(), nullable=True),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_audit_event'))
    )
    with op.batch_alter_table('audit_event', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_audit_event_at'), ['at'], unique=False)
        batch_op.create_index('ix_audit_event_substance_at', ['substance_id', 'at'], unique=False)

    op.create_table('idempotency_record',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('key', sa.String(length=200), nullable=False),
    sa.Column('key_owner', sa.String(length=200), nullable=False),
    sa.Column('request_hash', sa.String(length=128), nullable=False),
    sa.Column('response_status', sa.Integer(), nullable=False),
    sa.Column('response_body', sa.Text(), nullable=False),
    sa.Column('created_at', service.models.UTCDateTime(timezone=True), nullable=False),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_idempotency_record')),
    sa.UniqueConstraint('key_owner', 'key', name='uq_idempotency_owner_key')
    )
    with op.batch_alter_table('idempotency_record', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_idempotency_record_created_at'), ['created_at'], unique=False)

    op.create_table('substance',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=200), nullable=False),
    sa.Column('cas_rn', sa.String(length=20), nullable=True),
    sa.Column('smiles', sa.String(length=2000), nullable=True),
    sa.Column('substance_class', sa.String(length=200), nullable=True),
    sa.Column('notes', sa.Text(), nullable=True),
    sa.Column('created_at', service.models.UTCDateTime(timezone=True), nullable=False),
    sa.Column('created_by', sa.String(length=200), nullable=False),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_substance')),
    sa.UniqueConstraint('cas_rn', name=op.f('uq_substance_cas_rn')),
    sa.UniqueConstraint('name', name=op.f('uq_substance_name'))
    )
    op.create_table('fit_cache',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('substance_id', sa.Integer(), nullable=False),
    sa.Column('data_version', sa.String(length=64), nullable=False),
    sa.Column('options_key', sa.String(length=500), nullable=False),
    sa.Column('fit_json', sa.Text(), nullable=False),
    sa.Column('diagnostics_json', sa.Text(), nullable=False),
    sa.Column('created_at', service.models.UTCDateTime(timezone=True), nullable=False),
    sa.ForeignKeyConstraint(['substance_id'], ['substance.id'], name=op.f('fk_fit_cache_substance_id_substance')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_fit_cache')),
    sa.UniqueConstraint('substance_id', 'data_version', 'options_key', name='uq_fit_cache_key')
    )
    with op.batch_alter_table('fit_cache', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_fit_cache_substance_id'), ['substance_id'], unique=False)

    op.create_table('study',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('substance_id', sa.Integer(), nullable=False),
    sa.Column('laboratory', sa.String(length=300), nullable=False),
    sa.Column('test_guideline', sa.String(length=300), nullable=True),
    sa.Column('glp', sa.Boolean(), nullable=False),
    sa.Column('reference', sa.String(length=1000), nullable=True),
    sa.Column('start_date', sa.Date(), nullable=True),
    sa.Column('end_date', sa.Date(), nullable=True),
    sa.Column('notes', sa.Text(), nullable=True),
    sa.Column('created_at', service.models.UTCDateTime(timezone=True), nullable=False),
    sa.Column('created_by', sa.String(length=200), nullable=False),
    sa.ForeignKeyConstraint(['substance_id'], ['substance.id'], name=op.f('fk_study_substance_id_substance')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_study'))
    )
    with op.batch_alter_table('study', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_study_substance_id'), ['substance_id'], unique=False)

    op.create_table('run',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('run_uid', sa.String(length=36), nullable=False),
    sa.Column('version', sa.Integer(), nullable=False),
    sa.Column('status', sa.String(length=16), nullable=False),
    sa.Column('study_id', sa.Integer(), nullable=False),
    sa.Column('substance_id', sa.Integer(), nullable=False),
    sa.Column('natural_key', sa.String(length=400), nullable=False),
    sa.Column('supersedes_id', sa.Integer(), nullable=True),
    sa.Column('reason', sa.Text(), nullable=True),
    sa.Column('temperature_K', sa.Float(), nullable=False),
    sa.Column('pH', sa.Float(), nullable=False),
    sa.Column('buffer', sa.String(length=300), nullable=True),
    sa.Column('ionic_strength_M', sa.Float(), nullable=True),
    sa.Column('cosolvent_percent_v_v', sa.Float(), nullable=True),
    sa.Column('sterile', sa.Boolean(), nullable=False),
    sa.Column('dark', sa.Boolean(), nullable=False),
    sa.Column('replicate_label', sa.String(length=100), nullable=False),
    sa.Column('series_model', sa.String(length=16), nullable=True),
    sa.Column('notes', sa.Text(), nullable=True),
    sa.Column('kind', sa.String(length=16), nullable=False),
    sa.Column('time_unit_sent', sa.String(length=16), nullable=True),
    sa.Column('concentration_unit_sent', sa.String(length=32), nullable=True),
    sa.Column('concentration_unit', sa.String(length=32), nullable=True),
    sa.Column('loq', sa.Float(), nullable=True),
    sa.Column('k_per_s', sa.Float(), nullable=True),
    sa.Column('dt50_s', sa.Float(), nullable=True),
    sa.Column('se_ln_k', sa.Float(), nullable=True),
    sa.Column('rate_unit_sent', sa.String(length=16), nullable=True),
    sa.Column('created_at', service.models.UTCDateTime(timezone=True), nullable=False),
    sa.Column('created_by', sa.String(length=200), nullable=False),
    sa.Column('valid_to', service.models.UTCDateTime(timezone=True), nullable=True),
    sa.Column('withdrawn_reason', sa.Text(), nullable=True),
    sa.ForeignKeyConstraint(['study_id'], ['study.id'], name=op.f('fk_run_study_id_study')),
    sa.ForeignKeyConstraint(['substance_id'], ['substance.id'], name=op.f('fk_run_substance_id_substance')),
    sa.ForeignKeyConstraint(['supersedes_id'], ['run.id'], name=op.f('fk_run_supersedes_id_run')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_run')),
    sa.UniqueConstraint('run_uid', 'version', name='uq_run_run_uid_version')
    )
    with op.batch_alter_table('run', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_run_run_uid'), ['run_uid'], unique=False)
        batch_op.create_index(batch_op.f('ix_run_study_id'), ['study_id'], unique=False)
        batch_op.create_index('ix_run_substance_status', ['substance_id', 'status'], unique=False)
        batch_op.create_index('uq_run_current_natural_key', ['study_id', 'natural_key'], unique=True, sqlite_where=sa.text("status = 'current'"), postgresql_where=sa.text("status = 'current'"))

    op.create_table('observation',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('run_id', sa.Integer(), nullable=False),
    sa.Column('position', sa.Integer(), nullable=False),
    sa.Column('time_s', sa.Float(), nullable=False),
    sa.Column('concentration', sa.Float(), nullable=False),
    sa.Column('below_loq', sa.Boolean(), nullable=False),
    sa.ForeignKeyConstraint(['run_id'], ['run.id'], name=op.f('fk_observation_run_id_run')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_observation')),
    sa.UniqueConstraint('run_id', 'position', name='uq_observation_run_id_position')
    )
    with op.batch_alter_table('observation', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_observation_run_id'), ['run_id'], unique=False)



def downgrade() -> None:
    with op.batch_alter_table('observation', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_observation_run_id'))

    op.drop_table('observation')
    with op.batch_alter_table('run', schema=None) as batch_op:
        batch_op.drop_index('uq_run_current_natural_key', sqlite_where=sa.text("status = 'current'"), postgresql_where=sa.text("status = 'current'"))
        batch_op.drop_index('ix_run_substance_status')
        batch_op.drop_index(batch_op.f('ix_run_study_id'))
        batch_op.drop_index(batch_op.f('ix_run_run_uid'))

    op.drop_table('run')
    with op.batch_alter_table('study', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_study_substance_id'))

    op.drop_table('study')
    with op.batch_alter_table('fit_cache', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_fit_cache_substance_id'))

    op.drop_table('fit_cache')
    op.drop_table('substance')
    with op.batch_alter_table('idempotency_record', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_idempotency_record_created_at'))

    op.drop_table('idempotency_record')
    with op.batch_alter_table('audit_event', schema=None) as batch_op:
        batch_op.drop_index('ix_audit_event_substance_at')
        batch_op.drop_index(batch_op.f('ix_audit_event_at'))

    op.drop_table('audit_event')
    op.drop_table('api_key')
